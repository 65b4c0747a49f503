"""Simulate the demo data: an invented memory study, made up for showing anova-report.

No real study, person or dataset lies behind these numbers. Every score is drawn from a
normal distribution whose mean is set below (the "true" population means), with one common
standard deviation, then rounded to one decimal and kept inside the 0-40 scale. The seed is
fixed, so running this script again writes the same files byte for byte.

Writes, next to this script:
    recall_oneway.csv      participant, schedule, recalled
    recall_factorial.csv   participant, schedule, feedback, recalled
    recall_baseline.csv    participant, practice, pretest, recalled

The third study has its own seed (BASELINE_SEED), drawn after the first two, so adding it left
the first two files unchanged byte for byte.

Run:  python demo_project/generate.py
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

SEED = 20261202
SCALE_MAX = 40.0  # the recall score runs from 0 to 40
SD = 5.0  # common within-group standard deviation of the population

# One-way study: four rehearsal schedules; (level, true mean, n).
ONEWAY = (
    ("none", 14.0, 29),
    ("massed", 17.0, 28),
    ("spaced-short", 19.0, 30),
    ("spaced-long", 20.5, 27),
)

# Factorial study: schedule (2) x feedback (3); (schedule, feedback, true mean, n).
# The spacing advantage grows with feedback (3, 4, 5 points): a modest interaction.
FACTORIAL = (
    ("massed", "none", 16.0, 16),
    ("massed", "delayed", 18.0, 15),
    ("massed", "immediate", 19.0, 17),
    ("spaced", "none", 19.0, 15),
    ("spaced", "delayed", 22.0, 16),
    ("spaced", "immediate", 24.0, 14),
)

# Baseline study: three practice methods, a pretest taken before allocation; (level, true mean, n).
# The two quiz formats have the same true mean: whether the data show them equivalent within
# the plan's bounds is left to the sample.
BASELINE_SEED = 20261203
BASELINE = (
    ("restudy", 18.0, 41),
    ("quiz-paper", 21.0, 39),
    ("quiz-screen", 21.0, 40),
)
PRETEST_MEAN = 20.0  # words recalled from a different 40-word list before allocation
PRETEST_SD = 6.0
SLOPE = 0.75  # recall rises 0.75 words per pretest word, in every group
RESIDUAL_SD = 3.5  # SD of recall around the line: the raw SD is sqrt(0.75^2 * 6^2 + 3.5^2) = 5.70


def _scores(rng: np.random.Generator, mean: float, n: int) -> np.ndarray:
    """n scores around ``mean``, rounded to one decimal and kept on the 0-40 scale."""
    return np.clip(np.round(rng.normal(mean, SD, size=n), 1), 0.0, SCALE_MAX)


def _write(path: Path, header: tuple[str, ...], groups: list[tuple[tuple[str, ...], np.ndarray]],
           rng: np.random.Generator) -> list[tuple[str, ...]]:
    """Write the rows in a shuffled (allocation-like) order with ids S001, S002, ..."""
    rows = [(*levels, float(score)) for levels, scores in groups for score in scores]
    order = rng.permutation(len(rows))
    written = []
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        for number, index in enumerate(order, start=1):
            *levels, score = rows[index]
            row = (f"S{number:03d}", *levels, f"{score:.1f}")
            writer.writerow(row)
            written.append(row)
    return written


def _baseline(rng: np.random.Generator, mean: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """n (pretest, recall) pairs: a whole-word pretest, then recall on the line through the group's
    true mean at the average pretest, plus normal noise; both kept on the 0-40 scale."""
    pretest = np.clip(np.round(rng.normal(PRETEST_MEAN, PRETEST_SD, size=n)), 0.0, SCALE_MAX)
    noise = rng.normal(0.0, RESIDUAL_SD, size=n)
    recall = np.clip(np.round(mean + SLOPE * (pretest - PRETEST_MEAN) + noise, 1), 0.0, SCALE_MAX)
    return pretest, recall


def _write_baseline(path: Path, groups: list[tuple[str, np.ndarray, np.ndarray]], rng: np.random.Generator) -> None:
    """Write the rows in a shuffled (allocation-like) order with ids P001, P002, ..."""
    rows = [(level, int(x), float(y)) for level, xs, ys in groups for x, y in zip(xs, ys)]
    order = rng.permutation(len(rows))
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(("participant", "practice", "pretest", "recalled"))
        for number, index in enumerate(order, start=1):
            level, x, y = rows[index]
            writer.writerow((f"P{number:03d}", level, str(x), f"{y:.1f}"))


def _report_baseline(path: Path, groups: list[tuple[str, np.ndarray, np.ndarray]]) -> None:
    total = sum(len(xs) for _, xs, _ in groups)
    print(f"wrote {path.name}: {total} rows")
    for (level, xs, ys), (_, true_mean, _) in zip(groups, BASELINE):
        slope, intercept = np.polyfit(xs - PRETEST_MEAN, ys, 1)
        print(f"  {level:<20} n = {len(xs):>2}  true mean at pretest {PRETEST_MEAN:.0f} = {true_mean:5.2f}  "
              f"sample pretest mean = {xs.mean():5.2f}  sample recall mean = {ys.mean():5.2f}  "
              f"recall SD = {ys.std(ddof=1):4.2f}  own slope = {slope:4.2f}")


def _report(path: Path, groups: list[tuple[tuple[str, ...], np.ndarray]], means: list[float]) -> None:
    total = sum(len(scores) for _, scores in groups)
    print(f"wrote {path.name}: {total} rows")
    for (levels, scores), true_mean in zip(groups, means):
        label = " x ".join(levels)
        print(f"  {label:<20} n = {len(scores):>2}  true mean = {true_mean:5.2f}  "
              f"sample mean = {scores.mean():5.2f}  sample SD = {scores.std(ddof=1):4.2f}")


def main() -> None:
    here = Path(__file__).resolve().parent
    rng = np.random.default_rng(SEED)

    oneway = [((level,), _scores(rng, mean, n)) for level, mean, n in ONEWAY]
    path = here / "recall_oneway.csv"
    _write(path, ("participant", "schedule", "recalled"), oneway, rng)
    _report(path, oneway, [mean for _, mean, _ in ONEWAY])

    factorial = [((schedule, feedback), _scores(rng, mean, n)) for schedule, feedback, mean, n in FACTORIAL]
    path = here / "recall_factorial.csv"
    _write(path, ("participant", "schedule", "feedback", "recalled"), factorial, rng)
    _report(path, factorial, [mean for _, _, mean, _ in FACTORIAL])

    print(f"seed {SEED}; population SD {SD} in every group; scores simulated, not observed.")

    rng = np.random.default_rng(BASELINE_SEED)
    baseline = [(level, *_baseline(rng, mean, n)) for level, mean, n in BASELINE]
    path = here / "recall_baseline.csv"
    _write_baseline(path, baseline, rng)
    _report_baseline(path, baseline)
    print(f"seed {BASELINE_SEED}; pretest SD {PRETEST_SD}, slope {SLOPE}, residual SD {RESIDUAL_SD} in every "
          "group; scores simulated, not observed.")


if __name__ == "__main__":
    main()
