"""``canonical.group_keys`` against Arrow's hash kernel.

Reference: Apache Arrow compute function ``pyarrow.compute.dictionary_encode`` (its indices number
the distinct values in order of first appearance), and the first position of each distinct value
found by numpy (``numpy.unique(..., return_index=True)``): ``group_keys`` must give the same codes
and first positions on every kind of key set, in one thread or two, whatever its step sizes.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pytest

from workspace.io import canonical
from workspace.io.canonical import group_keys

#: the modular inverse of the multiplier (odd, so it has one modulo 2**64): keys made from chosen
#: products h as h * inverse, to aim keys at one bucket
_INVERSE = pow(int(canonical._MIX), -1, 2 ** 64)


def _reference(key: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    encoded = pc.dictionary_encode(pa.array(key, type=pa.uint64()))
    codes = encoded.indices.to_numpy(zero_copy_only=False)
    _, first = np.unique(key, return_index=True)
    return codes, np.sort(first)


def _aimed(h: list[int]) -> np.ndarray:
    """Keys whose products with the multiplier are ``h`` (modulo 2**64)."""
    return np.array([(x * _INVERSE) % 2 ** 64 for x in h], dtype=np.uint64)


def _key_sets() -> dict[str, np.ndarray]:
    rng = np.random.default_rng(20261203)
    distinct = rng.integers(0, 2 ** 64 - 1, 5000, dtype=np.uint64, endpoint=True)
    # products in one bucket, spread over the low bits: beyond the linear probes, found by bisection
    crowded = _aimed([(1 << 63) + int(x) for x in rng.integers(0, 1 << 40, 300)])
    return {
        "random 64-bit": distinct[rng.integers(0, distinct.size, 40_000)],
        "small integers": rng.integers(0, 50, 30_000).astype(np.uint64),
        "increasing": np.arange(25_000, dtype=np.uint64),
        "one value": np.full(17, 7, dtype=np.uint64),
        "single key": np.array([5], dtype=np.uint64),
        "extremes": np.array([2 ** 64 - 1, 0, 2 ** 64 - 1, 1, 0], dtype=np.uint64),
        "high bits only": (np.arange(3000, dtype=np.uint64) << np.uint64(40))[rng.integers(0, 3000, 20_000)],
        "ascii words": np.frombuffer(b"".join(b"n%07d" % i for i in range(4000)), dtype="<u8")[
            rng.integers(0, 4000, 30_000)].copy(),
        "one crowded bucket": np.concatenate([crowded, crowded[::-1], distinct[:100], crowded[:7]]),
    }


@pytest.mark.parametrize("name", list(_key_sets()))
@pytest.mark.parametrize("threads", [1, 2])
@pytest.mark.parametrize("steps", [(1 << 20, 1 << 22, 2), (1000, 3000, 2), (1000, 3000, 0), (1, 2, 0),
                                   (1, 2, 1)])
def test_group_keys_equals_arrows_dictionary_encode(monkeypatch, name, threads, steps):
    # steps: (records per lookup step, records per sort step at least, growth of the sort steps
    # with the distinct keys found: 0 keeps them one size)
    key = _key_sets()[name]
    if steps[0] == 1 and key.size > 5000:
        key = key[:5000]  # one key a step: kept short
    monkeypatch.setattr(canonical, "GROUP_STEP_RECORDS", steps[0])
    monkeypatch.setattr(canonical, "GROUP_SORT_RECORDS", steps[1])
    monkeypatch.setattr(canonical, "GROUP_SORT_GROWTH", steps[2])
    want_codes, want_first = _reference(key)
    if threads == 2:
        with ThreadPoolExecutor(2) as pool:
            codes, first = group_keys(key, pool)
    else:
        codes, first = group_keys(key)
    assert codes.dtype == np.int32 and first.dtype == np.int64
    np.testing.assert_array_equal(codes, want_codes)
    np.testing.assert_array_equal(first, want_first)
    assert key.tobytes() == _key_sets()[name][:key.size].tobytes()  # the keys are left as they were


def test_crowded_keys_reach_the_bisection():
    # the aimed keys really share a bucket beyond the linear probes (else the test above proves less)
    key = _key_sets()["one crowded bucket"]
    h = np.unique(key * canonical._MIX)
    bits = (h.size - 1).bit_length()
    buckets = h >> np.uint64(64 - bits)
    assert np.bincount(buckets.astype(np.int64)).max() > canonical._GROUP_PROBES + 1


def test_no_keys():
    codes, first = group_keys(np.zeros(0, dtype=np.uint64))
    assert codes.size == 0 and first.size == 0 and codes.dtype == np.int32
