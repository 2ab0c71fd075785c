"""Weight strings cast to numbers chunk by chunk in two threads (large files) give what the
one-call cast gives, and refuse the same records.

Reference: Python's ``float()`` on each string (language reference, "Floating point literals";
the weights here are plain decimal and exponent notation, where it and Arrow's cast agree).
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pytest

from workspace.errors import InputError
from workspace.io import _common


@pytest.fixture
def threaded(monkeypatch):
    monkeypatch.setattr(_common, "PARALLEL_CAST_MIN_VALUES", 1)
    monkeypatch.setattr(_common.os, "sched_getaffinity", lambda pid: {0, 1}, raising=False)
    calls = []
    original = _common._cast_chunks_in_threads
    monkeypatch.setattr(_common, "_cast_chunks_in_threads",
                        lambda values: calls.append(original(values)) or calls[-1])
    return calls


def _fail(i: int, message: str) -> InputError:
    return InputError(f"record {i}: {message}")


def _chunked(strings: list[str], cuts: list[int]) -> pa.ChunkedArray:
    bounds = [0, *cuts, len(strings)]
    return pa.chunked_array([pa.array(strings[a:b], pa.string()) for a, b in zip(bounds[:-1], bounds[1:])])


def test_chunks_cast_in_threads_equal_float_of_each_string(threaded):
    rng = np.random.default_rng(3)
    strings = [f"{x:.6f}" for x in rng.uniform(0, 5, 3000)] + ["1e-3", "2.5E2", "7", "0.000001"]
    weight = _common.weights_from_strings(_chunked(strings, [1, 1000, 2999]), _fail)
    assert threaded and threaded[0] is not None  # the two-thread path ran
    assert weight.dtype == np.float64
    assert weight.tolist() == [float(s) for s in strings]


def test_a_chunk_with_blanks_takes_the_trimming_path_with_the_same_values(threaded):
    strings = ["1.5", "2", " 3.25 ", "4"] * 50
    weight = _common.weights_from_strings(_chunked(strings, [100]), _fail)
    assert threaded == [None]  # the plain cast refused a chunk: the serial path trims
    assert weight.tolist() == [float(s) for s in strings]


@pytest.mark.parametrize("bad, message", [("-2", "is negative"), ("nan", "is NaN"),
                                          ("inf", "is infinite"), ("heavy", "is not a number")])
def test_the_first_bad_record_is_named_in_file_order(threaded, bad, message):
    strings = ["1.0"] * 700
    strings[650] = bad
    strings[690] = "-5"  # a later bad record in another chunk is not the one reported
    with pytest.raises(InputError, match=f"record 650: weight '{bad}' {message}"):
        _common.weights_from_strings(_chunked(strings, [300, 660]), _fail)
