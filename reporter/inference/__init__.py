"""Everything around the model fit: effect sizes, multiplicity, post-hoc families, assumption
checks, robust alternatives, the permutation F and power; ``collect.py`` decides what applies to a
plan and ``analysis.py`` is the one call that fits everything a report needs."""
