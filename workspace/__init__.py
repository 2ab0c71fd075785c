"""cutbook: a versioned workspace for spectral network partitioning.

Public scripting interface: :func:`workspace.spectral.partition` (numerics) and the
``cutbook`` command's ``--json`` outputs. Nothing heavy is imported here.

Importing the package sets one environment variable, before numpy or scipy load OpenBLAS (every
entry point -- the command, the terminal UI, a Dask worker, a script that imports ``workspace``
first -- passes here): ``OPENBLAS_THREAD_TIMEOUT`` (see :data:`OPENBLAS_IDLE_WAIT`). A value the
user set is kept.
"""

import os as _os
import sys as _sys

__version__ = "0.1.0"

#: ``OPENBLAS_THREAD_TIMEOUT`` set here: OpenBLAS's worker threads busy-wait ``2**n`` cycles for more
#: work before they sleep (n from 4 to 30; the default 28 is about a tenth of a second). OpenBLAS
#: reads it once, when it loads. With the default, the second BLAS thread of an eigensolve spins
#: through every sparse product the solver's own threads compute between two BLAS calls, so the
#: solver gave BLAS one thread (``workspace.spectral.eigen``). 2**16 cycles (tens of microseconds)
#: still covers the back-to-back calls of one ARPACK step and leaves the products the cores.
OPENBLAS_IDLE_WAIT = 16

#: the longest idle wait (2**n cycles) with which a solve still gives OpenBLAS a second thread
OPENBLAS_SHORT_WAIT_MAX = 16


def loaded_openblas() -> frozenset:
    """Paths of the OpenBLAS libraries mapped into this process now (numpy's and scipy's wheels each
    bundle one), from ``/proc/self/maps`` (Linux; empty elsewhere)."""
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as fh:
            return frozenset(line.split()[-1] for line in fh
                             if "openblas" in line.lower() and line.split()[-1].startswith("/"))
    except OSError:
        return frozenset()


def _set_openblas_idle_wait() -> tuple[bool, frozenset]:
    """Set :data:`OPENBLAS_IDLE_WAIT` unless the user chose a value; return whether the wait in
    force is short (at most :data:`OPENBLAS_SHORT_WAIT_MAX`) and the OpenBLAS libraries that
    were loaded before this package (they keep the wait they loaded with, unless it came from the
    user's environment)."""
    name = "OPENBLAS_THREAD_TIMEOUT"
    chosen = _os.environ.get(name)
    if chosen is None:
        _os.environ[name] = str(OPENBLAS_IDLE_WAIT)
        # numpy loads an OpenBLAS and scipy imports numpy first: without numpy nothing is loaded yet
        before = loaded_openblas() if "numpy" in _sys.modules else frozenset()
        return True, before
    try:
        wait = int(chosen)
    except ValueError:
        return False, frozenset()
    return 0 < wait <= OPENBLAS_SHORT_WAIT_MAX, frozenset()  # OpenBLAS reads 4 for 1-3, its default for <= 0


_openblas_short_wait, _openblas_loaded_before = _set_openblas_idle_wait()


def openblas_waits_briefly(path: str) -> bool:
    """True when the OpenBLAS library at ``path`` loaded with a short idle wait (see
    :data:`OPENBLAS_IDLE_WAIT`): its threads then sleep as soon as a call is done."""
    return _openblas_short_wait and path not in _openblas_loaded_before
