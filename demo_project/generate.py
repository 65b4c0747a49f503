"""Simulate the demo data: an invented memory study, made up for showing anova-report.

No real study, person or dataset lies behind these numbers. Every score is drawn from a
normal distribution whose mean is set below (the "true" population means), with one common
standard deviation, then rounded to one decimal and kept inside the 0-40 scale. The seed is
fixed, so running this script again writes the same files byte for byte.

Writes, next to this script:
    recall_oneway.csv      participant, schedule, recalled
    recall_factorial.csv   participant, schedule, feedback, recalled

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


if __name__ == "__main__":
    main()
