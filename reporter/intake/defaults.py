"""Every default of the plan file, in one place.

The plan's ``[analysis]`` table may set any of these; a key it leaves out takes the value here.
The documentation (README, DEVELOPERS.md) points to this module instead of repeating the values.
"""

from __future__ import annotations

ANALYSIS_DEFAULTS: dict[str, object] = {
    # Two-sided significance level of every test; confidence intervals are at 1 - alpha.
    "alpha": 0.05,
    # How the design matrix is coded: "cell-means" (one beta per cell), "effects"
    # (sum to zero, last listed level coded -1) or "reference" (first listed level is the reference).
    "parameterization": "cell-means",
    # Sums of squares of the ANOVA table: "I" (sequential), "II" (adjusted for the other main
    # effects) or "III" (unweighted means). Hypotheses written as `effect = ...` always test
    # unweighted means, whatever the table uses.
    "ss_type": "III",
    # Multiplicity correction across the planned hypotheses:
    # "holm", "hochberg", "bonferroni", "benjamini-hochberg" or "none".
    "correction": "holm",
    # Optional post-hoc families: any of "all-pairs", "versus-control", "any-contrast".
    "posthoc": (),
    # What the post-hoc families compare: "cells", or the name of one factor (its marginal means).
    "posthoc_on": "cells",
    # The control level of the "versus-control" family.
    "control": None,
    # How unequal variances are handled: "classical", "robust-if-heterogeneous" or "always-robust".
    "unequal_variances": "classical",
    # Number of permutations of the permutation F test, and its random seed.
    "permutations": 10_000,
    "seed": 20261202,
    # Rows above which the permutation F is skipped (the F distribution is then an accurate
    # reference, and the permutations would take minutes); raise it to run the test anyway.
    # Measured by benchmarks/bench_permutation_threshold.py.
    "permutation_max_rows": 100_000,
}

DATA_DEFAULTS: dict[str, object] = {
    # Field separator of a text file; None means "," for .csv and a tab for .tsv.
    "delimiter": None,
    # Decimal mark of a text file: "." or "," (files written with ";" and decimal commas).
    "decimal": ".",
    # Text cells that mean "missing" in the outcome column (compared after trimming).
    "missing": ("", "NA", "NaN", "nan", "N/A", "."),
    # What one row of the data file is: "rows" (one observation) or "cell-summaries" (one cell
    # of the design: its factor levels, n, mean and a spread, as a GROUP BY query writes them).
    "layout": "rows",
}

# Keys of [data] that only a cell-summary table reads (layout = "cell-summaries").
SUMMARY_DEFAULTS: dict[str, object] = {
    # Column holding each cell's number of observations (a whole number >= 1).
    "n_column": "n",
    # Column holding each cell's mean.
    "mean_column": "mean",
    # Which spread the table gives: "sd" (standard deviation, n - 1 denominator), "variance"
    # (n - 1 denominator) or "se" (standard error of the mean, SD / sqrt(n)).
    "spread": "sd",
    # Column holding the spread; None means a column named like the spread ("sd", "variance", "se").
    "spread_column": None,
    # Decimals the means and spreads were rounded to; None means: read them off the text (CSV/TSV,
    # or a Parquet DECIMAL column), or take Parquet floating-point values as unrounded.
    "mean_decimals": None,
    "spread_decimals": None,
}

PARAMETERIZATIONS = ("cell-means", "effects", "reference")
SS_TYPES = ("I", "II", "III")
CORRECTIONS = ("holm", "hochberg", "bonferroni", "benjamini-hochberg", "none")
POSTHOC_FAMILIES = ("all-pairs", "versus-control", "any-contrast")
UNEQUAL_VARIANCES = ("classical", "robust-if-heterogeneous", "always-robust")
ROLES = ("planned", "exploratory")
DATA_SUFFIXES = (".csv", ".tsv", ".txt", ".parquet")
LAYOUTS = ("rows", "cell-summaries")
SPREADS = ("sd", "variance", "se")
MAX_DECIMALS = 20
