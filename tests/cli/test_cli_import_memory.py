"""Process settings of the CLI import: freed memory kept for reuse, OpenBLAS's idle threads.

References: glibc ``mallopt(3)`` (``M_MMAP_MAX``: 0 disables mmap for large requests;
``M_TRIM_THRESHOLD``: free memory kept at the top of the heap) and ``getrusage(2)``
(``ru_minflt``, page faults served without I/O); OpenBLAS's ``OPENBLAS_THREAD_TIMEOUT``
(documented in its README, read when the library loads); mimalloc's ``MIMALLOC_ALLOW_THP``
(its environment options, read when it loads) and proc(5) ``AnonHugePages``. Each check runs in a fresh
interpreter so that the test process keeps its own settings.
"""

from __future__ import annotations

import os
import platform
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

_PRELUDE = """
import resource, sys, threading
def faults_for(n):
    before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    block = bytearray(n)
    block[::4096] = b"\\x01" * len(block[::4096])  # touch every page
    del block
    return resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before
if sys.argv[1] == "keep":
    from workspace.cli.networks import keep_freed_memory
    assert keep_freed_memory()
"""
_FAULTS = _PRELUDE + "print(faults_for(64 << 20), faults_for(64 << 20))\n"


def _run(code: str, *args: str, env: dict | None = None) -> str:
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True,
                         env={**os.environ, "PYTHONPATH": str(ROOT), **(env or {})}, check=True)
    return out.stdout.strip()


@pytest.mark.skipif(not sys.platform.startswith("linux") or platform.libc_ver()[0] != "glibc",
                    reason="mallopt settings are glibc's")
def test_a_freed_block_is_reused_without_new_page_faults():
    # 64 MiB = 16384 pages of 4 KiB: a fresh mapping faults on each page when first touched
    first, second = map(int, _run(_FAULTS, "plain").split())
    assert first >= 16000 and second >= 16000  # default glibc: mapped and unmapped each time
    first, second = map(int, _run(_FAULTS, "keep").split())
    assert first >= 16000 and second < 200  # kept in the heap: the second block reuses the pages


# a block touched and freed on another thread, then one of the same size on the main thread
_THREADS = _PRELUDE + """
worker = threading.Thread(target=faults_for, args=(16 << 20,))
worker.start(); worker.join()
print(faults_for(16 << 20))
"""


@pytest.mark.skipif(not sys.platform.startswith("linux") or platform.libc_ver()[0] != "glibc",
                    reason="mallopt settings are glibc's")
def test_a_block_freed_on_another_thread_is_reused():
    # 16 MiB = 4096 pages: with one shared heap (M_ARENA_MAX = 1) the main thread reuses the pages
    # another thread freed; by default that thread's block stays in its own arena (or is unmapped)
    assert int(_run(_THREADS, "plain")) >= 4000
    assert int(_run(_THREADS, "keep")) < 200


_SETTINGS = """
import os, sys
from workspace.cli.networks import native_library_settings
with native_library_settings():
    inside = [os.environ.get(k) for k in ("OPENBLAS_THREAD_TIMEOUT", "NUMPY_MADVISE_HUGEPAGE")]
    import numpy
after = [os.environ.get(k) for k in ("OPENBLAS_THREAD_TIMEOUT", "NUMPY_MADVISE_HUGEPAGE")]
print(*inside, *after)
"""


def test_library_settings_are_set_only_while_numpy_loads():
    names = ("OPENBLAS_THREAD_TIMEOUT", "NUMPY_MADVISE_HUGEPAGE")
    env = {k: v for k, v in os.environ.items() if k not in names}
    out = subprocess.run([sys.executable, "-c", _SETTINGS], capture_output=True, text=True, check=True,
                         env={**env, "PYTHONPATH": str(ROOT)}).stdout.split()
    # the huge-page advice is off for the load only (child processes keep numpy's default); OpenBLAS's
    # idle wait is the package's, set for the whole process when ``workspace`` loads
    assert out == ["16", "0", "16", "None"]
    # a value the user set is kept, and stays
    assert _run(_SETTINGS, env={"OPENBLAS_THREAD_TIMEOUT": "20"}).split() == ["20", "0", "20", "None"]


def test_numpy_loaded_under_the_settings_gives_no_huge_page_advice():
    # numpy's own switch reports the advice it follows (numpy reads NUMPY_MADVISE_HUGEPAGE at load)
    code = ("from workspace.cli.networks import native_library_settings\n"
            "with native_library_settings():\n    import numpy\n"
            "from numpy._core.multiarray import _get_madvise_hugepage\nprint(_get_madvise_hugepage())")
    assert _run(code) == "False"


# Arrow's mimalloc pool (the pool of large imports) writing a 64 MiB array; the process's
# anonymous huge pages (``AnonHugePages`` of /proc/self/smaps, proc(5)) before and after
_ARROW_HUGE = """
import re, sys
def huge_kib():
    return sum(int(x) for x in re.findall(r"AnonHugePages:\\s+(\\d+)", open("/proc/self/smaps").read()))
if sys.argv[1] == "settings":
    from workspace.cli.networks import native_library_settings
    with native_library_settings():
        import pyarrow
import numpy as np, pyarrow as pa, pyarrow.compute as pc
pool = pa.mimalloc_memory_pool()
before = huge_kib()
out = pc.add(pa.array(np.arange(8 << 20, dtype=np.int64)), 1, memory_pool=pool)
print(huge_kib() - before)
"""


def _thp_mode() -> str:
    try:
        text = Path("/sys/kernel/mm/transparent_hugepage/enabled").read_text()
    except OSError:
        return "never"
    return text[text.index("[") + 1:text.index("]")]


@pytest.mark.skipif(not sys.platform.startswith("linux") or _thp_mode() == "never",
                    reason="transparent huge pages are Linux's, and off on this kernel")
def test_arrow_pool_loaded_under_the_settings_takes_no_huge_pages():
    # mimalloc reads MIMALLOC_ALLOW_THP when it loads (mimalloc's documented options)
    import pyarrow as pa

    try:
        pa.mimalloc_memory_pool()
    except NotImplementedError:
        pytest.skip("this pyarrow build has no mimalloc pool")
    control = int(_run(_ARROW_HUGE, "plain"))
    if control == 0:
        pytest.skip("the kernel gave mimalloc no huge page even without the setting")
    assert int(_run(_ARROW_HUGE, "settings")) == 0
