"""The seeded sample's two searches (reporter.intake.rows.sample_positions) against the rule
itself, computed the slow way: every key by sample_key, the smallest taken with numpy's stable
argsort (reference library)."""

from __future__ import annotations

import numpy as np

from reporter.intake.rows import _key_inverse, _smallest, sample_key, sample_positions


def _by_sorting(n: int, size: int, seed: int) -> np.ndarray:
    return np.sort(np.argsort(sample_key(np.arange(n), seed), kind="stable")[:size])


def test_inverse_search_over_several_steps_equals_sorting_every_key():
    """n² > size · 2^32 takes the search through the inverse hash; size = 1000 at n = 3·10^6 scans
    about 1.4 million keys, several steps, and the last step finds more rows than it needs."""
    for n, size, seed in ((3_000_000, 1000, 11), (2_000_000, 100, 2**40 + 5), (2_500_000, 1, 0)):
        assert n * n > size * 2**32
        assert np.array_equal(sample_positions(n, size, seed), _by_sorting(n, size, seed))


def test_forward_search_over_several_steps_equals_sorting_every_key():
    """n² <= size · 2^32: the keys of every position, in steps of 2^18 positions, here 4 of them."""
    for n, size, seed in ((1_000_000, 5000, 3), (1_000_000, 300_000, 4), (70_000, 69_999, 5)):
        assert n * n <= size * 2**32
        assert np.array_equal(sample_positions(n, size, seed), _by_sorting(n, size, seed))


def test_at_two_to_the_32_rows_the_sample_is_the_positions_of_keys_0_1_2():
    """With n = 2^32 every position is analysed, so the rows with the smallest keys are those whose
    keys are 0, 1, ..., size − 1, found by undoing each step of the hash."""
    keys = np.arange(3, dtype=np.uint64)
    assert np.array_equal(sample_positions(2**32, 3, 9), np.sort(_key_inverse(keys, 9)).astype(np.int64))
    assert np.sort(sample_key(sample_positions(2**32, 3, 9), 9)).tolist() == [0, 1, 2]


def test_smallest_breaks_ties_by_position():
    """Beyond 2^32 rows keys repeat; the kept pairs equal numpy's lexsort by (key, position)."""
    rng = np.random.default_rng(1)
    for _ in range(200):
        m, size = int(rng.integers(1, 300)), int(rng.integers(1, 320))
        keys = rng.integers(0, 20, m).astype(np.uint32)
        pos = rng.permutation(10**6)[:m].astype(np.int64)
        _, kept = _smallest(keys, pos, size)
        assert np.array_equal(np.sort(kept), np.sort(pos[np.lexsort((pos, keys))[:size]]))


def test_inverse_search_near_two_to_the_32_rows_takes_the_keys_in_order():
    """Nearly every key then belongs to an analysed row, so the sample must be the positions of the
    smallest keys exactly: here the first ``size`` of the keys 0, 1, 2, ... whose position (each
    step of the hash undone, one key at a time) is below n."""
    keys = np.arange(1 << 21, dtype=np.uint64)
    for n, size, seed in ((2**32 - 5, 1_060_000, 7), (2**31, 100_000, 8), (3 * 2**30, 400_001, 2**40 + 1)):
        pos = _key_inverse(keys, seed).astype(np.int64)
        ref = np.sort(pos[pos < n][:size])
        assert ref.size == size
        assert np.array_equal(sample_positions(n, size, seed), ref)
