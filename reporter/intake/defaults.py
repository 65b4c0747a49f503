"""Every default of the plan file, in one place.

The plan's ``[analysis]`` table may set any of these; a key it leaves out takes the value here.
The documentation (README, DEVELOPERS.md) points to this module instead of repeating the values.
"""

from __future__ import annotations

ANALYSIS_DEFAULTS: dict[str, object] = {
    # Two-sided significance level of every test; confidence intervals are at 1 - alpha.
    "alpha": 0.05,
    # How the design matrix is coded, which fixes what each coefficient (beta) means:
    # "cell-means" (one beta per cell, each a cell mean), "sum-to-zero" (each factor's codes sum
    # to zero, the last listed level coded -1: betas are deviations from averages of cell means) or
    # "reference-level" (the first listed level of each factor is the reference: betas are
    # differences from the reference cell). Tests of hypotheses do not depend on this choice.
    "coding": "cell-means",
    # Sums of squares of the ANOVA table: "type-I" (sequential, in the order the factors are
    # listed), "type-II" (each effect adjusted for the other main effects) or "type-III"
    # (unweighted means). Hypotheses written as `effect = ...` always test unweighted means,
    # whatever the table uses.
    "sums_of_squares": "type-III",
    # Multiplicity correction across the planned hypotheses:
    # "holm", "hochberg", "bonferroni", "benjamini-hochberg" or "none".
    "correction": "holm",
    # Optional exploratory follow-up families, run after the planned tests: any of
    # "all-pairs-tukey" (every pair of groups, Tukey–Kramer), "versus-control-dunnett" (each group
    # against the control, Dunnett) and "all-contrasts-scheffe" (pairs, with Scheffé's bound that
    # holds for every contrast one might look at afterwards).
    "follow_up": (),
    # What the follow-up families compare: "cells", or the name of one factor (its unweighted
    # marginal means).
    "follow_up_compares": "cells",
    # The control group of "versus-control-dunnett": a level of the compared factor, or a cell
    # written as its levels joined by "/" (e.g. "placebo/young").
    "follow_up_control": None,
    # How unequal variances are handled: "classical", "robust-if-heterogeneous" or "always-robust".
    "unequal_variances": "classical",
    # Number of permutations of the permutation F test, and its random seed.
    "permutations": 10_000,
    "seed": 20261202,
    # Rows above which the permutation F is skipped by default; raise it to run the test anyway.
    # Measured by benchmarks/bench_permutation_threshold.py: from 1,000 rows of strongly skewed
    # errors in unequal cells the F distribution's 5% and 1% tails match the permutation
    # distribution within Monte Carlo error, while 10,000 permutations cost about 0.2-0.5 ms per
    # 1,000 rows each: beyond 50,000 rows, over 10-25 s per test.
    "permutation_max_rows": 50_000,
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
    # Which reader reads the data: "automatic" (out-of-core for a glob or for files of at least
    # OUT_OF_CORE_BYTES together, in-memory otherwise), "in-memory" or "out-of-core" (DuckDB).
    "reader": "automatic",
}

PLANNING_DEFAULTS: dict[str, object] = {
    # The optional [planning] table: the smallest effect of interest, from which the analysis-plan
    # document of `anova-report lock` computes the cell size each planned test needs.
    # For F tests (effect hypotheses and statements of several rows): Cohen's f (Cohen 1988, ch. 8).
    "smallest_effect_f": None,
    # For one-row contrasts (t tests): the contrast's value divided by the within-cell SD (d) ...
    "smallest_effect_d": None,
    # ... or the contrast's value in the outcome's own units, with the within-cell SD assumed
    # (the two keys go together, and replace smallest_effect_d).
    "smallest_difference": None,
    "assumed_sd": None,
    # The powers the table solves for.
    "powers": (0.80, 0.90),
}
MAX_PLANNING_POWERS = 5

COVARIATES_DEFAULTS: dict[str, object] = {
    # Each [[covariates]] table names a numeric column of the data ("name", required) whose
    # linear effect the model removes (analysis of covariance).
    # The covariate value at which adjusted means are evaluated: "mean" (the mean of the rows
    # used) or a number in the covariate's units.
    "adjust_to": "mean",
    # "common" (one slope for all cells) or "per-cell" (a separate slope in each cell; effects are
    # then evaluated at adjust_to).
    "slopes": "common",
    # An optional text for the plan's reader.
    "description": None,
}
COVARIATE_SLOPES = ("common", "per-cell")

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

# Plan values of the options above, each with the internal value the code uses.
CODINGS = {"cell-means": "cell-means", "sum-to-zero": "effects", "reference-level": "reference"}
SUMS_OF_SQUARES = {"type-I": "I", "type-II": "II", "type-III": "III"}
FOLLOW_UPS = {
    "all-pairs-tukey": "all-pairs",
    "versus-control-dunnett": "versus-control",
    "all-contrasts-scheffe": "any-contrast",
}
PARAMETERIZATIONS = tuple(CODINGS.values())
SS_TYPES = tuple(SUMS_OF_SQUARES.values())
POSTHOC_FAMILIES = tuple(FOLLOW_UPS.values())
CORRECTIONS = ("holm", "hochberg", "bonferroni", "benjamini-hochberg", "none")
# Keys of [analysis] that had other names before the first release: a plan using one is told the
# new name.
RENAMED_KEYS = {
    "parameterization": "coding",
    "ss_type": "sums_of_squares",
    "posthoc": "follow_up",
    "posthoc_on": "follow_up_compares",
    "control": "follow_up_control",
}

# Option values renamed likewise (the sums-of-squares types "I", "II", "III" are hinted in plan.py).
RENAMED_VALUES = {
    "effects": "sum-to-zero",
    "reference": "reference-level",
    "all-pairs": "all-pairs-tukey",
    "versus-control": "versus-control-dunnett",
    "any-contrast": "all-contrasts-scheffe",
}


def plan_value(mapping: dict[str, str], internal: str) -> str:
    """The plan's name of an internal option value (for results.json, messages and the report)."""
    for name, value in mapping.items():
        if value == internal:
            return name
    return internal
UNEQUAL_VARIANCES = ("classical", "robust-if-heterogeneous", "always-robust")
ROLES = ("planned", "exploratory")
DATA_SUFFIXES = (".csv", ".tsv", ".txt", ".parquet")
LAYOUTS = ("rows", "cell-summaries")
SPREADS = ("sd", "variance", "se")
MAX_DECIMALS = 20
READERS = ("automatic", "in-memory", "out-of-core")
# Files at least this large (bytes, all matched files together) are read out-of-core by default.
# Measured by benchmarks/bench_reader.py (whole runs, --format json): CSV of 10 MB (10^6 rows)
# took 0.43x the in-memory time and 0.41x its memory, CSV of 1 MB 1.09x the time; Parquet took
# about the same time from 0.6 to 53 MB, with 0.68x the memory at 5 MB and 0.28x at 53 MB.
OUT_OF_CORE_BYTES = 8 * 1000 * 1000

# ---------------------------------------------------------------------------------------------
# Limits. Each lies far beyond any real plan or study; together they keep a broken or hostile
# input from running out of time or memory. A value beyond a limit is refused with a message that
# names the limit.

# Size of the plan file, in bytes.
MAX_PLAN_BYTES = 1 << 20
# Depth of nested arrays and inline tables in the plan's TOML (a real plan uses 2).
MAX_TOML_NESTING = 20
# Size of a text data file (CSV/TSV) read into memory, in bytes.
MAX_TEXT_DATA_BYTES = 1 << 30
# Characters of text values in the plan.
MAX_TITLE_CHARS = 300
MAX_SUMMARY_CHARS = 5_000
MAX_NAME_CHARS = 200  # a hypothesis name, factor name, level, column name or outcome name
MAX_DESCRIPTION_CHARS = 5_000  # a hypothesis description or a [study] text
MAX_PATH_CHARS = 1_024  # [data] path
MAX_MISSING_TOKENS = 100
# Counts in the plan.
MAX_LEVELS = 256  # levels of one factor
MAX_FACTORS = 6
MAX_CELLS = 256  # product of the factors' level counts (measured: 256 cells run in under a minute)
MAX_HYPOTHESES = 100
MAX_COVARIATES = 10  # [[covariates]] tables
# Hypothesis statements: characters, tokens, and depth of nested parentheses and signs.
MAX_STATEMENT_CHARS = 5_000
MAX_STATEMENT_TOKENS = 1_000
MAX_STATEMENT_NESTING = 30
# Numbers written as text (data values, levels, statement coefficients).
MAX_EXPONENT_DIGITS = 4  # 1e-3 and 1e300 are read; 1e99999 is refused before any arithmetic
MAX_NUMBER_CHARS = 100  # characters of one outcome value in a text data file
# A coefficient or constant in a statement: 0, or a magnitude within [1e-100, 1e100].
STATEMENT_NUMBER_EXPONENT = 100
# The smallest alpha accepted: below it 1 - alpha/2 is no longer distinguishable enough from 1 in
# float64 for the quantiles of the tests (common practice, no source).
MIN_ALPHA = 1e-9
