"""The eigensolver chain: dense ``eigh`` → ARPACK ``eigsh`` → LOBPCG.

Every eigenproblem in the package is posed as "the ``m`` algebraically
largest eigenpairs of a symmetric operator ``M``" — the smallest eigenpairs
of a Laplacian are obtained from a shifted operator ``M = cI - L`` whose
spectrum is non-negative, e.g. ``I + D^-1/2 A D^-1/2 = 2I - L_sym`` — so
ARPACK runs with ``which='LA'`` and no shift-invert (a sparse LU of a
small-world graph fills in catastrophically).

The operator is wrapped in a counting ``LinearOperator`` whose matvec
checks ``cancel``, the matvec budget and the time limit, and reports
``progress(stage, matvecs)``.
"""

from __future__ import annotations

import threading
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.sparse.linalg import ArpackError, ArpackNoConvergence, LinearOperator, eigsh, lobpcg

import workspace
from workspace.domain import available_cpus
from workspace.errors import Cancelled, ComputeError

from .laplacians import degrees, inverse_sqrt_degrees, normalized_adjacency, with_loops_doubled
from .ordering import median_span, permuted_scaled

__all__ = ["SolverContext", "SymmetricOperator", "EigenSolution", "largest_eigenpairs",
           "laplacian_eigenpairs", "fix_signs", "warm_start_vector", "start_distance"]


class _BudgetExceeded(Exception):
    """Internal: the matvec budget or time limit ran out inside a solver."""


@dataclass
class SolverContext:
    """Limits, callbacks and counters shared by all eigenproblems of one call.

    Attributes
    ----------
    seed : int
        Seeds the start vectors (``numpy.random.default_rng(seed)``).
    dense_threshold : int, default 1000
        Operators with ``n <= dense_threshold`` are solved densely.
    eig_tol : float, default 1e-6
        ARPACK relative tolerance; LOBPCG uses it scaled by the spectral radius bound.
    max_matvecs : int, default 50000
        Budget of operator applications per eigenproblem (columns count).
    time_limit_s : float, default 0
        Wall-time limit per eigenproblem; 0 means none.
    progress : callable(stage: str, matvecs: int) or None
    cancel : callable() -> bool or None
    threads : int, default 0
        Threads for the sparse products of the iterative solvers (row
        blocks). 0 = automatic: every CPU available to the process for
        operators of at least :data:`PARALLEL_AUTO_MIN_ROWS` rows, one below.
        Results do not depend on it: each output entry is computed by one
        thread.
    """

    seed: int = 0
    dense_threshold: int = 1000
    eig_tol: float = 1e-6
    max_matvecs: int = 50000
    time_limit_s: float = 0.0
    progress: Callable[[str, int], None] | None = None
    cancel: Callable[[], bool] | None = None
    threads: int = 0
    matvecs: int = 0
    solvers: list = field(default_factory=list)
    iterations: int = 0
    residual_norms: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    extra_accuracy: float | None = None  # residual bound of quickly estimated eigenvalues beyond k
    warm_start: dict | None = None  # outcome of the last warm-started solve: used, fallback, matvecs
    blas_threads: int | None = None  # most OpenBLAS threads a solve fixed (None: left as they were)
    _problem_matvecs: int = 0
    _problem_start: float = 0.0
    _last_report: float = 0.0

    def check_cancel(self) -> None:
        """Raise :class:`workspace.errors.Cancelled` if ``cancel()`` says so."""
        if self.cancel is not None and self.cancel():
            raise Cancelled("partition cancelled")

    def report(self, stage: str, force: bool = True) -> None:
        """Call ``progress(stage, matvecs)`` (at most every 0.2 s unless forced)."""
        if self.progress is None:
            return
        now = time.perf_counter()
        if force or now - self._last_report >= 0.2:
            self._last_report = now
            self.progress(stage, int(self.matvecs))

    def start_problem(self) -> None:
        self._problem_matvecs = 0
        self._problem_start = time.perf_counter()

    def tick(self, count: int, stage: str) -> None:
        """Account for ``count`` operator applications; enforce limits."""
        self.matvecs += count
        self._problem_matvecs += count
        self.check_cancel()
        if self._problem_matvecs > self.max_matvecs:
            raise _BudgetExceeded(f"matvec budget max_matvecs={self.max_matvecs} used up")
        if self.time_limit_s > 0 and time.perf_counter() - self._problem_start > self.time_limit_s:
            raise _BudgetExceeded(f"time limit time_limit_s={self.time_limit_s:g} reached")
        self.report(stage, force=False)


#: Operators of at least this many nodes do not store the normalised adjacency
#: :math:`N = D^{-1/2} A D^{-1/2}` (a second copy of the nnz values, 0.36 GB at 3M nodes
#: and 22.5M edges) but apply it as ``s * (A @ (s * x))`` with :math:`s = d^{-1/2}`. The
#: two forms differ only by rounding (the product of three factors is grouped
#: differently), so every smaller graph -- every test graph and the demo -- keeps the
#: stored form and its results bit for bit; the same threshold as
#: :data:`workspace.spectral.ordering.ORDER_MIN_NODES`, below which the vectors fit in
#: cache and a copy of the values costs little.
SCALED_PRODUCT_MIN_NODES = 500_000

#: From this many rows a block ``S @ X`` is computed one column at a time. scipy's block kernel
#: (``csr_matvecs``) adds ``b`` products per stored entry through a short loop, its vector kernel
#: one; both add the same terms in the same order from zero, so the columns are the same bits
#: (checked on a 1M-node planted partition), and at 1M nodes eight columns took 324-416 ms against
#: 444-533 ms for the block (the residual check after every solve is such a block).
COLUMNWISE_MIN_ROWS = 100_000

#: ``threads=0`` (automatic, the default) multiplies operators of at least this many rows in
#: every available CPU, smaller ones in one (there a product takes a few milliseconds and the
#: thread hand-off is a visible share). Each output row is computed by one thread, so the bits do
#: not depend on it. Measured on the 2-core machine, planted partitions of mean degree 15, one
#: product in one / two threads: quiet (load 0.0-0.3) 1M rows 22.6-23.3 / 14.6-14.8 ms, 2M
#: 41.2-42.7 / 33.3-36.5 ms, 3M 110.7-124.6 / 63.0-73.4 ms; 10M at load 2.4-2.6 659-746 /
#: 353-643 ms. A whole 1M-node njw run, quiet: 7.8-8.5 s wall with one, 6.3-6.4 s with two (CPU
#: 7.8-8.4 / 7.9-8.0 s); under load 2 the two took the same wall time as one. Since products
#: go into reused vectors (:meth:`SymmetricOperator.apply_into`) two threads pay from 100k rows
#: (stored normalised adjacency + identity, load 0.5-1): 100k 1.85-2.41 / 0.93-1.52 ms, 200k
#: 5.19-5.33 / 3.13-3.56 ms, 300k 7.50-8.87 / 5.28-6.08 ms, 600k 16.0-17.4 / 11.1-12.9 ms.
PARALLEL_AUTO_MIN_ROWS = 100_000

#: Sparse matrices with fewer stored entries are multiplied in one thread.
PARALLEL_MIN_NNZ = 200_000


try:  # scipy's own CSR kernels: they add into a given output (``csr_array @ x`` runs them on zeros)
    from scipy.sparse._sparsetools import csr_matvec as _csr_matvec, csr_matvecs as _csr_matvecs
except ImportError:  # pragma: no cover - another scipy: blocks as csr_arrays (which copy their slices)
    _csr_matvec = _csr_matvecs = None


class _RowBlock:
    """Rows ``start:stop`` of a CSR matrix: views on its ``data``/``indices`` and a local ``indptr``."""

    def __init__(self, S: sp.csr_array, start: int, stop: int) -> None:
        p0, p1 = int(S.indptr[start]), int(S.indptr[stop])
        self.start, self.stop, self.n_cols = start, stop, S.shape[1]
        self.data, self.indices = S.data[p0:p1], S.indices[p0:p1]
        self.indptr = (S.indptr[start:stop + 1] - p0).astype(S.indices.dtype)
        self.matrix = None

    def product_into(self, X: np.ndarray, out: np.ndarray) -> None:
        """``out[start:stop] = rows @ X``: scipy's kernel on zeros, so the bits of ``S @ X``."""
        target = out[self.start:self.stop]
        rows = self.stop - self.start
        if _csr_matvec is not None and X.dtype == self.data.dtype == np.float64 and X.flags.c_contiguous:
            target.fill(0.0)
            try:
                if X.ndim == 1:
                    _csr_matvec(rows, self.n_cols, self.indptr, self.indices, self.data, X, target)
                else:
                    _csr_matvecs(rows, self.n_cols, X.shape[1], self.indptr, self.indices, self.data,
                                 X.ravel(), target.reshape(-1))
                return
            except (TypeError, ValueError):  # a kernel signature of another scipy: the matrix below
                pass
        if self.matrix is None:
            self.matrix = sp.csr_array((self.data, self.indices, self.indptr), shape=(rows, self.n_cols))
        target[...] = self.matrix @ X


class RowBlockMatrix:
    """A CSR matrix cut into row blocks that are multiplied in parallel.

    The blocks are views on the parent's ``data``/``indices`` (only a small ``indptr`` is copied):
    scipy's kernel is called on them directly, since building a ``csr_array`` from a slice that
    does not start at 0 copied it (scipy 1.17: a 1M-node run's peak grew by 67 MB, one copy of
    the second half of the matrix). scipy's sparse kernels release the GIL, so the blocks run
    concurrently in a thread pool; every output row is produced by exactly one thread, so the
    result is bit-identical to the single-threaded product.
    """

    def __init__(self, S: sp.csr_array, executor: ThreadPoolExecutor, parts: int) -> None:
        self.shape = S.shape
        self.executor = executor
        n = S.shape[0]
        targets = np.linspace(0, S.nnz, parts + 1)
        cuts = np.searchsorted(S.indptr, targets).clip(0, n)
        cuts[0], cuts[-1] = 0, n
        cuts = np.unique(cuts)
        self.blocks = [_RowBlock(S, int(a), int(b)) for a, b in zip(cuts[:-1], cuts[1:])]

    def __matmul__(self, X: np.ndarray) -> np.ndarray:
        return self.product_into(X, np.empty((self.shape[0],) + X.shape[1:], dtype=np.float64))

    def product_into(self, X: np.ndarray, out: np.ndarray) -> np.ndarray:
        """``out[...] = S @ X`` (``out`` C-contiguous float64 of the product's shape); returns ``out``."""
        futures = [self.executor.submit(blk.product_into, X, out) for blk in self.blocks[1:]]
        self.blocks[0].product_into(X, out)
        for f in futures:
            f.result()
        return out


#: From this many rows the sparse products of an iterative solve use column panels
#: (:class:`PanelMatrix`): the product vector (8 bytes a row) takes more than one panel of
#: :data:`PANEL_BYTES` and, on a graph without locality, every stored entry reads it at a random
#: place in a share of the last-level cache (32 MB, shared with the machine's other tenants). Below
#: it (every test graph, the demo, 1M nodes) the products are row blocks; the bits are the same
#: either way. Measured on planted partitions of mean degree 15 (``tests/benchmarks/bench_products.py``,
#: one thread, CPU per 1M rows, load 1-2): 10M rows 62.8 ms plain, 41.3-42.6 ms in panels; 5M
#: 52.7 / 25.1 ms. Whole njw runs in process (3M nodes, seed 0, three alternated rounds, load
#: 0.7-1.4): products 12.8 / 18.4 / 18.4 s in row blocks, 9.2 / 14.7 / 10.1 s in two panels; at 2M
#: (one panel) 8.7 / 7.4 s against 6.4 / 7.7 s, no clear gain, hence the bound between.
PANEL_MIN_ROWS = 2_500_000

#: Column panels only for a matrix whose node order has no locality: a median edge span
#: (:func:`ordering.median_span`) of at least this share of the rows (about 0.29 for random ends).
#: With locality the plain reads of the vector already stay in the cache and the panels only add
#: row visits: a 2-D grid stored in row-major order (median span at most its side; the engine
#: declines a computation order there, as no shorter), one product in two threads (load 0.8),
#: took 8.8 ms in row blocks and 16.8 ms in two panels at 3M nodes, 27.0 against 63.4 ms in five
#: panels at 10M. (A matrix put in the computation order is not panelled either: its rows are
#: not sorted.)
PANEL_MIN_SPAN = 1 / 8

#: Bytes of the vector one column panel reads (its width is this over 8 bytes, evened out over
#: the panels): half the 32 MB last-level cache, which the two product threads share. At 10M rows
#: (one thread, CPU per 1M rows) 8 MB panels took 59.3 ms, 12 MB 47.1, 16 MB 41.3, 20 MB 44.9:
#: narrower panels visit every row once more each (a planted row has 15 entries).
PANEL_BYTES = 16 << 20

#: Rows per row range of a :class:`PanelMatrix` (the regrouping's temporaries are this many rows).
PANEL_RANGE_ROWS = 1 << 17


def _panel_moves(offsets: np.ndarray, panels: int, rows: int) -> np.ndarray:
    """Positions, in panel order, of the stored entries of ``rows`` rows in row order.

    ``offsets`` (length ``panels * rows + 1``) starts the entries of (panel ``p``, row ``r``) at
    ``offsets[p * rows + r]``; in row order row ``r`` holds its panels one after the other. Entry
    ``e`` of the row order goes to ``dest[e]``.
    """
    counts = np.diff(offsets).reshape(panels, rows).T.ravel()        # segments in row order
    first_new = offsets[:-1].reshape(panels, rows).T.ravel().astype(np.int64)
    first_old = np.zeros(counts.shape[0], dtype=np.int64)
    np.cumsum(counts[:-1], out=first_old[1:])
    return np.repeat(first_new - first_old, counts) + np.arange(int(offsets[-1]), dtype=np.int64)


class PanelMatrix:
    r"""A CSR matrix whose products read the vector one column panel at a time, without a copy.

    The columns are cut into ``P`` panels of :data:`PANEL_BYTES` of the vector each and the rows
    into ranges of :data:`PANEL_RANGE_ROWS`. Inside each row range the stored entries are regrouped
    **in place** by panel, stably (within a row and panel the entries keep their column order), and
    one local ``indptr`` per (range, panel) is kept (``P`` int indices a row in all). The product
    :math:`y = Sx` is then :math:`y = 0`, and for each panel in column order and each row range
    scipy's ``csr_matvec`` on that piece, which adds into ``y[range]``
    (``sum = y[i]; sum += A_ij x_j ...; y[i] = sum``): while one panel is being multiplied the
    random reads of ``x`` stay in a slice that fits in the cache. With the columns of each row
    sorted (required) these are the additions of the plain product in the same order, so
    :math:`y` is the same bits as ``S @ x``. Blocks are multiplied one column at a time (the same
    bits as scipy's block kernel, see :data:`COLUMNWISE_MIN_ROWS`). With an executor and
    ``parts`` > 1 each thread owns a contiguous share of the row ranges (every output row is
    computed by one thread), and the threads take the panels in step (a hand-off per panel), so
    they share one slice of ``x`` in the cache.

    The regrouped arrays are those of ``S``: until :meth:`restore` (which puts every entry back in
    its row order, the same bits) ``S`` must not be read as a plain CSR matrix. The engine builds it
    inside :func:`largest_eigenpairs` and restores it before returning (see :func:`_panelled`).

    Parameters
    ----------
    S : scipy sparse CSR matrix, shape (n, m)
        float64 values, int32 or int64 indices, the columns of every row sorted; its ``data`` and
        ``indices`` are regrouped in place.
    panel_bytes : int, optional
        Bytes of ``x`` per panel (width ``panel_bytes / 8`` columns, evened out); default
        :data:`PANEL_BYTES`.
    range_rows : int, optional
        Rows per row range; default :data:`PANEL_RANGE_ROWS`.

    References
    ----------
    Nishtala, Vuduc, Demmel & Yelick (2007), When cache blocking of sparse matrix vector multiply
    works and why, Applicable Algebra in Engineering, Communication and Computing 18(3) (cache
    blocking of the source vector by column panels); Gustavson (1978), ACM TOMS 4(3) (CSR).
    """

    def __init__(self, S, panel_bytes: int | None = None, range_rows: int | None = None) -> None:
        n, ncol = S.shape
        self.shape = S.shape
        self.dtype = np.dtype(np.float64)
        self.nnz = int(S.nnz)
        self.data, self.indices = S.data, S.indices
        indptr = S.indptr
        width = max(1, int(panel_bytes or PANEL_BYTES) // 8)
        panels = max(1, -(-ncol // width))
        self.width = max(1, -(-ncol // panels))                      # evened out
        self.panels = panels = max(1, -(-ncol // self.width))
        step = max(1, int(range_rows or PANEL_RANGE_ROWS))
        idx = S.indices.dtype
        self.ranges: list[tuple[int, int, int, int, np.ndarray]] = []   # (start, stop, p0, p1, offsets)
        self.restored = False
        try:
            for a in range(0, n, step):
                b = min(n, a + step)
                rows = b - a
                p0, p1 = int(indptr[a]), int(indptr[b])
                offsets = np.zeros(panels * rows + 1, dtype=idx)
                if p1 > p0:
                    local = np.repeat(np.arange(rows, dtype=np.int64), np.diff(indptr[a:b + 1]))
                    key = (S.indices[p0:p1] // self.width).astype(np.int64) * rows + local
                    del local
                    np.cumsum(np.bincount(key, minlength=panels * rows), out=offsets[1:])
                    del key
                    dest = _panel_moves(offsets, panels, rows)
                    # both moved copies first: a range is regrouped whole or not at all
                    data, indices = np.empty(p1 - p0, self.data.dtype), np.empty(p1 - p0, idx)
                    data[dest] = self.data[p0:p1]
                    indices[dest] = self.indices[p0:p1]
                    self.data[p0:p1] = data
                    self.indices[p0:p1] = indices
                    del dest, data, indices
                self.ranges.append((a, b, p0, p1, offsets))
        except BaseException:
            self.restore()                # the ranges regrouped so far: the matrix as it was
            raise

    def restore(self) -> None:
        """Put every stored entry back in its row order (the matrix as it was, bit for bit)."""
        if self.restored:
            return
        for a, b, p0, p1, offsets in self.ranges:
            if p1 > p0:
                dest = _panel_moves(offsets, self.panels, b - a)
                for arr in (self.data, self.indices):
                    seg = arr[p0:p1]
                    seg[...] = seg[dest]
        self.restored = True

    def groups(self, parts: int) -> list[list[tuple]]:
        """The row ranges cut into ``parts`` contiguous shares of about equal stored entries."""
        if parts <= 1 or len(self.ranges) < 2:
            return [self.ranges]
        ends = np.array([r[3] for r in self.ranges], dtype=np.int64)
        cuts = np.searchsorted(ends, np.linspace(0, self.nnz, parts + 1)[1:-1])
        cuts = np.unique(np.concatenate([[0], cuts + 1, [len(self.ranges)]]).clip(0, len(self.ranges)))
        return [self.ranges[int(i):int(j)] for i, j in zip(cuts[:-1], cuts[1:]) if j > i]

    def _rows_into(self, ranges, x: np.ndarray, out: np.ndarray, panels=None) -> None:
        """``out[range] += S[range, panel] @ x`` for the given row ranges and panels, panel after panel
        (all panels: ``out[range]`` is zeroed first)."""
        ncol = self.shape[1]
        if panels is None:
            for a, b, *_ in ranges:
                out[a:b] = 0.0
            panels = range(self.panels)
        for p in panels:
            for a, b, p0, p1, offsets in ranges:
                rows = b - a
                _csr_matvec(rows, ncol, offsets[p * rows:(p + 1) * rows + 1], self.indices[p0:p1],
                            self.data[p0:p1], x, out[a:b])

    def times(self, x: np.ndarray, executor: ThreadPoolExecutor | None = None, parts: int = 1,
              out: np.ndarray | None = None) -> np.ndarray:
        """``S @ x`` for a vector or an ``n × b`` block (a column at a time); a vector's product goes
        into ``out`` when given (C-contiguous float64, length n)."""
        if self.restored:
            raise RuntimeError("the panelled matrix was restored to rows; build a new one")
        x = np.asarray(x)
        if x.ndim == 2:
            out = np.empty((self.shape[0], x.shape[1]), dtype=np.float64)
            for j in range(x.shape[1]):
                out[:, j] = self.times(x[:, j], executor, parts)
            return out
        x = np.ascontiguousarray(x, dtype=np.float64)
        if out is None:
            out = np.empty(self.shape[0], dtype=np.float64)
        groups = self.groups(parts) if executor is not None else [self.ranges]
        if len(groups) == 1:
            self._rows_into(groups[0], x, out)
            return out
        out.fill(0.0)
        for p in range(self.panels):     # the threads keep to one panel (one slice of x) at a time
            futures = [executor.submit(self._rows_into, g, x, out, (p,)) for g in groups[1:]]
            self._rows_into(groups[0], x, out, (p,))
            for f in futures:
                f.result()
        return out

    def __matmul__(self, X: np.ndarray) -> np.ndarray:
        return self.times(X)


class _BoundPanels:
    """A :class:`PanelMatrix` multiplied by ``parts`` threads of an executor (one solve's view)."""

    def __init__(self, panels: PanelMatrix, executor: ThreadPoolExecutor | None, parts: int) -> None:
        self.panels, self.executor, self.parts = panels, executor, parts
        self.shape, self.dtype, self.nnz = panels.shape, panels.dtype, panels.nnz

    def __matmul__(self, X: np.ndarray) -> np.ndarray:
        return self.panels.times(X, self.executor, self.parts)

    def product_into(self, x: np.ndarray, out: np.ndarray) -> np.ndarray:
        """``out[...] = S @ x`` for a vector; returns ``out``."""
        return self.panels.times(x, self.executor, self.parts, out=out)


def panels_apply(S, n: int) -> bool:
    """Whether an iterative solve multiplies ``S`` by column panels (see :data:`PANEL_MIN_ROWS`):
    a CSR matrix of float64 values with the columns of every row sorted (the panelled sums are then
    the plain product's, bit for bit; an unsorted matrix keeps the plain product and its order)
    whose node order has no locality (:data:`PANEL_MIN_SPAN`)."""
    if n < PANEL_MIN_ROWS or _csr_matvec is None or not sp.issparse(S) or S.format != "csr":
        return False
    if S.data.dtype != np.float64 or S.indices.dtype not in (np.int32, np.int64) or S.nnz == 0:
        return False
    if not all(a.flags.writeable and a.flags.c_contiguous and a.ndim == 1 for a in (S.data, S.indices)):
        return False                   # regrouped in place: a read-only (e.g. memory-mapped) matrix is left alone
    if median_span(S) < PANEL_MIN_SPAN * n:
        return False                   # a node order with locality: the plain reads are cached
    if S.indices.dtype == np.int32:   # the local indptrs share the indices' type
        step = max(1, PANEL_RANGE_ROWS)
        bounds = S.indptr[np.r_[0:n:step, n]].astype(np.int64)
        if int(np.diff(bounds).max()) >= 2 ** 31:
            return False
    return bool(S.has_sorted_indices)


_panel_lock = threading.Lock()
_panel_users: dict = {}   # (data, indices, nnz) of a matrix being panelled -> [PanelMatrix, solves using it]


class _panelled:
    """Context manager: the operator an iterative solve multiplies, its sparse part by column panels
    (:class:`PanelMatrix`) where :func:`panels_apply`, else by row blocks (``parts`` > 1) or as it is.

    The panels regroup the matrix's own arrays: solves of the same matrix running at once in several
    threads share one :class:`PanelMatrix` (counted under a lock), and the last to leave restores the
    row order, so after every solve the matrix is again the caller's, bit for bit.
    """

    def __init__(self, op: "SymmetricOperator", executor: ThreadPoolExecutor | None, parts: int) -> None:
        self.op, self.executor, self.parts = op, executor, parts
        self.key = None

    def __enter__(self) -> "SymmetricOperator":
        op, S = self.op, self.op.S
        if op.n >= PANEL_MIN_ROWS and sp.issparse(S) and S.format == "csr":
            key = (S.data.__array_interface__["data"][0], S.indices.__array_interface__["data"][0], int(S.nnz))
            with _panel_lock:
                entry = _panel_users.get(key)
                if entry is None and panels_apply(S, op.n):
                    entry = _panel_users[key] = [PanelMatrix(S), 0]
                if entry is not None:
                    entry[1] += 1
                    self.key = key
                    return op.with_sparse(_BoundPanels(entry[0], self.executor, self.parts))
        if self.executor is not None:
            return op.parallel(self.executor, self.parts)
        return op

    def __exit__(self, *exc) -> None:
        if self.key is None:
            return
        with _panel_lock:
            entry = _panel_users[self.key]
            entry[1] -= 1
            if entry[1] == 0:
                del _panel_users[self.key]
                entry[0].restore()


class SymmetricOperator:
    r"""A real symmetric ``n × n`` operator ``M x = S x + diag(c) x + low-rank``.

    Parameters
    ----------
    S : scipy sparse matrix, shape (n, n)
        Symmetric sparse part (scaled by ``scale``).
    diagonal : float or ndarray of float64, shape (n,), default 0
        Added diagonal.
    scale : float, default 1
        Multiplies ``S``.
    rank_one : ndarray, shape (n,), optional
        Vector ``u``; the term ``- u (u^T x) / rank_one_denominator`` is added.
    rank_one_denominator : float, default 1
    row_scale : ndarray of float64, shape (n,), optional
        Vector ``s``: the sparse part is :math:`\mathrm{diag}(s)\,S\,\mathrm{diag}(s)`,
        applied as ``s * (S @ (s * x))`` without storing the scaled matrix
        (see :data:`SCALED_PRODUCT_MIN_NODES`).
    order : ndarray of int, shape (n,), optional
        The operator is stored in a computation order
        (:mod:`workspace.spectral.ordering`): ``S``, ``diagonal`` and
        ``rank_one`` are :math:`P S P^T`, :math:`P c`, :math:`P u` with
        ``order[i]`` the original node at position ``i``. The eigensolver
        then permutes its seeded start vector in and the eigenvectors out,
        so callers see the original order.
    """

    def __init__(self, S, diagonal=0.0, scale: float = 1.0, rank_one=None,
                 rank_one_denominator: float = 1.0, order=None, row_scale=None) -> None:
        self.S = S
        self.order = order
        self.row_scale = row_scale
        self.n = S.shape[0]
        self.diagonal = diagonal
        self.scale = float(scale)
        self.rank_one = rank_one
        self.rank_one_denominator = float(rank_one_denominator)

    def apply_into(self, x: np.ndarray, out: np.ndarray, scratch: np.ndarray) -> np.ndarray:
        """``M @ x`` for a vector, written into ``out`` with ``scratch`` as its one temporary (both
        C-contiguous float64 vectors of length n, not ``x``); returns ``out``. The same operations
        as :meth:`apply`, so the same bits, without allocating: at 10M nodes every product's three
        fresh 80 MB temporaries were mapped, zeroed and unmapped by the kernel (10.5 s of system
        time in a 118 s run)."""
        if np.ndim(x) != 1:
            raise ValueError(f"apply_into takes a vector (got {np.ndim(x)} dimensions)")
        if type(self).apply is not SymmetricOperator.apply:     # a subclass with its own product
            out[...] = self.apply(x)
            return out
        S = self.S
        source = x
        if self.row_scale is not None:
            np.multiply(x, self.row_scale, out=scratch)
            source = scratch
        if hasattr(S, "product_into"):
            S.product_into(source, out)
        elif sp.issparse(S) and S.format == "csr" and _csr_matvec is not None and S.data.dtype == np.float64 \
                and source.flags.c_contiguous and source.dtype == np.float64:
            out.fill(0.0)
            _csr_matvec(S.shape[0], S.shape[1], S.indptr, S.indices, S.data, source, out)
        else:
            out[...] = S @ source
        if self.row_scale is not None:
            out *= self.row_scale
        if self.scale != 1.0:
            out *= self.scale
        diag = self.diagonal
        if np.ndim(diag) == 0:
            if diag != 0.0:
                np.multiply(x, diag, out=scratch)
                out += scratch
        else:
            np.multiply(x, diag, out=scratch)
            out += scratch
        if self.rank_one is not None:
            u = self.rank_one
            np.multiply(u, (u @ x) / self.rank_one_denominator, out=scratch)
            out -= scratch
        return out

    def apply(self, X: np.ndarray) -> np.ndarray:
        """``M @ X`` for a vector or an ``n × b`` block."""
        if self.row_scale is None:
            Y = self._sparse_times(X)
        else:
            r = self.row_scale if X.ndim == 1 else self.row_scale[:, None]
            Y = self._sparse_times(X * r)
            Y *= r
        if self.scale != 1.0:
            Y *= self.scale
        diag = self.diagonal
        if np.ndim(diag) == 0:
            if diag != 0.0:
                Y += diag * X
        else:
            Y += diag[:, None] * X if X.ndim == 2 else diag * X
        if self.rank_one is not None:
            u = self.rank_one
            Y -= np.multiply.outer(u, (u @ X) / self.rank_one_denominator)
        return Y

    def _sparse_times(self, X: np.ndarray) -> np.ndarray:
        """``S @ X``; a block on a large operator one column at a time (see :data:`COLUMNWISE_MIN_ROWS`)."""
        if X.ndim == 1 or X.shape[1] < 2 or X.shape[0] < COLUMNWISE_MIN_ROWS or not (
                sp.issparse(self.S) or isinstance(self.S, RowBlockMatrix)):
            return self.S @ X
        Y = np.empty(X.shape, dtype=np.result_type(X.dtype, np.float64))
        for j in range(X.shape[1]):
            Y[:, j] = self.S @ np.ascontiguousarray(X[:, j])
        return Y

    def parallel(self, executor: ThreadPoolExecutor, parts: int) -> "SymmetricOperator":
        """Same operator with the sparse part multiplied by ``parts`` threads."""
        if parts < 2 or not sp.issparse(self.S) or self.S.nnz < PARALLEL_MIN_NNZ:
            return self
        S = self.S if isinstance(self.S, sp.csr_array) else sp.csr_array(self.S)
        return SymmetricOperator(RowBlockMatrix(S, executor, parts), self.diagonal, self.scale,
                                 self.rank_one, self.rank_one_denominator, self.order, self.row_scale)

    def with_sparse(self, S) -> "SymmetricOperator":
        """Same operator with another object for its sparse part (anything with ``@``)."""
        return SymmetricOperator(S, self.diagonal, self.scale, self.rank_one, self.rank_one_denominator,
                                 self.order, self.row_scale)

    def to_dense(self) -> np.ndarray:
        """The dense ``n × n`` matrix (only for small ``n``)."""
        M = self.S.toarray() if sp.issparse(self.S) else np.array(self.S, dtype=np.float64)
        if self.row_scale is not None:
            M = M * self.row_scale[:, None] * self.row_scale[None, :]
        M = M * self.scale if self.scale != 1.0 else M.astype(np.float64, copy=False)
        M[np.diag_indices(self.n)] += self.diagonal
        if self.rank_one is not None:
            M -= np.multiply.outer(self.rank_one, self.rank_one) / self.rank_one_denominator
        return M


@dataclass
class EigenSolution:
    """Eigenpairs returned by the chain.

    Attributes
    ----------
    values : ndarray of float64, shape (m,)
        Eigenvalues in the order documented by the caller.
    vectors : ndarray of float64, shape (n, m)
        Matching eigenvectors (columns), signs fixed by :func:`fix_signs`.
    solver : str
        ``"dense-eigh"``, ``"arpack-eigsh"`` or ``"lobpcg"``.
    matvecs : int
        Operator applications used (0 for dense).
    residual_norms : list of float
        :math:`\\|M x - \\mu x\\|_2` per pair, for the operator actually solved.
    """

    values: np.ndarray
    vectors: np.ndarray
    solver: str
    matvecs: int
    residual_norms: list


def fix_signs(V: np.ndarray) -> np.ndarray:
    """Make the largest-magnitude entry of every column positive (in place).

    Parameters
    ----------
    V : ndarray of float64, shape (n, m)

    Returns
    -------
    ndarray, shape (n, m)
        ``V`` itself, each column multiplied by ±1.

    Notes
    -----
    Ties in magnitude go to the lowest row index. An eigenvector is defined
    up to sign; fixing it makes downstream results reproducible (common
    practice; cf. sklearn.utils.extmath.svd_flip).

    References
    ----------
    Bro, Acar & Kolda (2008), Resolving the sign ambiguity in the singular
    value decomposition, J. Chemometrics 22.
    """
    if V.size == 0:
        return V
    idx = np.argmax(np.abs(V), axis=0)
    signs = np.sign(V[idx, np.arange(V.shape[1])])
    signs[signs == 0] = 1.0
    V *= signs
    return V


def largest_eigenpairs(op: SymmetricOperator, m: int, ctx: SolverContext, *,
                       stage: str = "eigensolver", bound: float | None = None,
                       extra: int = 0, start: np.ndarray | None = None) -> EigenSolution:
    r"""The ``m`` algebraically largest eigenpairs of a symmetric operator.

    Chain: if ``n <= ctx.dense_threshold`` or ``m >= n - 1``, dense
    ``scipy.linalg.eigh`` (LAPACK ``syevr``) on the explicit matrix;
    otherwise ARPACK ``eigsh(which='LA')`` with a start vector drawn from
    ``default_rng(ctx.seed)``; if ARPACK does not converge within its
    iteration budget, LOBPCG (Knyazev 2001) started from ARPACK's best
    vectors.

    Parameters
    ----------
    op : SymmetricOperator
        ``n × n`` symmetric operator.
    m : int
        Number of eigenpairs, ``1 <= m <= n``.
    ctx : SolverContext
        Seed, limits, callbacks; counters are updated.
    stage : str, default "eigensolver"
        Name passed to ``progress``.
    bound : float, optional
        Upper bound on the spectral radius (scales the LOBPCG tolerance).
    extra : int, default 0
        Further eigenvalues wanted beyond the ``m`` pairs, for display, the
        eigengap and the tie test. On the dense path they are exact. On the
        cold ARPACK path they are first taken from ARPACK's last Lanczos step
        at no cost (:func:`_arpack_with_next`), when decisive
        (:func:`_decisive_ritz`); otherwise, and on the other iterative
        paths, they are Ritz values of the deflated operator
        :math:`P M P`, :math:`P = I - VV^T` (requires ``M`` positive
        semidefinite, true of every shifted operator here), computed with a
        loose tolerance that is tightened (1e-2, 1e-3, 1e-4, then
        ``ctx.eig_tol``) only while the gap to the m-th value is not larger
        than three residual bounds — eigenvalues next to a wide gap
        converge slowly and need no precision.
    start : ndarray of float64, shape (n, b), optional
        A warm start: vectors believed close to the wanted eigenvectors (for
        example the previous version's eigenvectors mapped onto this graph's
        nodes). On the iterative path the chain then first runs
        :func:`_warm_arpack` (ARPACK from :func:`warm_start_vector`) and
        accepts its pairs only under the cold solve's convergence test; otherwise (and with a note in
        ``ctx.warm_start["fallback"]``) it solves cold as above. Ignored on
        the dense path.

    Returns
    -------
    EigenSolution
        ``values`` descending (largest first), shape (m + extra,) (fewer if
        ``n`` is small); ``vectors`` shape (n, m).

    Raises
    ------
    workspace.errors.ComputeError
        All solvers failed, or the matvec/time budget ran out; the message
        says which and with what residual.
    workspace.errors.Cancelled
        ``ctx.cancel()`` returned True.

    Notes
    -----
    ARPACK (implicitly restarted Lanczos) is used in its regular mode; the
    callers make the wanted end of the spectrum the algebraically largest
    by a shift, which leaves Krylov subspaces and eigenvectors unchanged.

    References
    ----------
    Lehoucq, Sorensen & Yang (1998), ARPACK Users' Guide, SIAM.
    Knyazev (2001), Toward the optimal preconditioned eigensolver: LOBPCG,
    SIAM J. Sci. Comput. 23(2).
    """
    n = op.n
    if not 1 <= m <= n:
        raise ComputeError(f"cannot compute {m} eigenpairs of a {n}-node operator")
    ctx.check_cancel()
    ctx.start_problem()
    ctx.report(stage)
    if n <= ctx.dense_threshold or m + extra >= n - 1:
        if start is not None:
            ctx.warm_start = {"used": False, "fallback": "dense solve (small operator); start block not needed",
                              "matvecs": 0}
        M = op.to_dense()
        total = min(n, m + extra)
        try:
            w, V = sla.eigh(M, subset_by_index=[n - total, n - 1], driver="evr")
        except (np.linalg.LinAlgError, ValueError) as exc:  # pragma: no cover - LAPACK failure
            raise ComputeError(f"dense eigensolver failed: {exc}") from None
        w = w[::-1].copy()
        V = np.ascontiguousarray(V[:, ::-1])
        fix_signs(V)
        V = V[:, :m]
        res = np.linalg.norm(M @ V - V * w[:m], axis=0)
        if op.order is not None:
            V = _to_original_order(V, op.order)
        sol = EigenSolution(w, V, "dense-eigh", 0, [float(r) for r in res])
        _record(ctx, sol)
        ctx.check_cancel()
        return sol

    threads = ctx.threads if ctx.threads > 0 else (available_cpus() if n >= PARALLEL_AUTO_MIN_ROWS else 1)
    pool = threads > 1 and sp.issparse(op.S) and op.S.nnz >= PARALLEL_MIN_NNZ
    executor = ThreadPoolExecutor(max_workers=threads - 1) if pool else None
    try:
        with _blas_threads(n) as blas, _panelled(op, executor, threads if pool else 1) as run_op:
            if blas.counts:
                ctx.blas_threads = max(ctx.blas_threads or 0, max(blas.counts))
            sol = _iterative(run_op, m, ctx, stage, bound, extra, start)
    finally:
        if executor is not None:
            executor.shutdown()
    if op.order is not None:
        sol.vectors = _to_original_order(sol.vectors, op.order)
    return sol


#: From this many rows an iterative solve fixes OpenBLAS's thread count (and k-means runs it in one
#: thread); below it (every test graph, the demo) the BLAS setting is left as it is and results stay
#: bit for bit those of plain scipy. ARPACK's own work is level-2 BLAS on the n x ncv Lanczos basis
#: (``dgemv``), memory-bound, between the sparse products the solver computes in its own threads.
#: Threads split the sums of a ``dgemv``, so the count changes the last bits of the eigenpairs:
#: fixing it (:data:`SOLVE_BLAS_THREADS`) keeps a solve reproducible to the bit on one machine.
BLAS_FIXED_THREADS_MIN_NODES = 100_000

#: OpenBLAS threads of a solve from :data:`BLAS_FIXED_THREADS_MIN_NODES` rows, when the library's idle
#: threads sleep at once (``workspace.OPENBLAS_IDLE_WAIT``, set before it loads), the process may use
#: two CPUs and the library was given at least two threads; otherwise one. With OpenBLAS's default
#: idle wait (about 0.1 s of busy-waiting after every call) the second thread spun through every
#: sparse product: at 1M nodes (planted partition, k = 8, 124 products, 2 cores, load 6-7) 17.0 s
#: CPU / 44.5 s wall against 10.3 s / 28.3 s with one thread. With the short wait it no longer
#: competes: 1M nodes, 112 products, five alternated runs each (load 1.0-1.3), ARPACK's own work
#: 2.8-3.3 s -> 2.0-2.7 s, the whole run median 6.85 -> 5.44 s wall, CPU unchanged (7.4-9.3 s).
SOLVE_BLAS_THREADS = 2

_openblas: list = []


def _openblas_thread_calls() -> list:
    """``(path, get, set)``: the thread-count functions of every OpenBLAS loaded in this process.

    numpy and scipy wheels each bundle one (``scipy_openblas*`` symbol names); they are found
    by :func:`workspace.loaded_openblas` (Linux). Empty elsewhere, or with another BLAS: then
    nothing is changed.
    """
    if _openblas:
        return _openblas[0]
    import ctypes

    calls = []
    for path in sorted(workspace.loaded_openblas()):
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for prefix in ("openblas", "scipy_openblas"):
            for suffix in ("", "64_"):
                get = getattr(lib, f"{prefix}_get_num_threads{suffix}", None)
                put = getattr(lib, f"{prefix}_set_num_threads{suffix}", None)
                if get is not None and put is not None:
                    get.restype = ctypes.c_int
                    put.argtypes = [ctypes.c_int]
                    calls.append((path, get, put))
    _openblas.append(calls)
    return calls


_blas_lock = threading.Lock()
# solves and assignments inside _blas_threads now, and the thread counts to restore after the last
_blas_holders = {"solves": 0, "others": 0, "saved": []}


def _blas_count(path: str, saved: int, solving: bool) -> int:
    """OpenBLAS threads while solves (``solving``) or only assignments hold :class:`_blas_threads`."""
    if solving and saved >= SOLVE_BLAS_THREADS and available_cpus() >= SOLVE_BLAS_THREADS \
            and workspace.openblas_waits_briefly(path):
        return SOLVE_BLAS_THREADS
    return 1


class _blas_threads:
    """Context manager: OpenBLAS's thread count fixed while an operator of ``n`` rows is solved
    (:data:`SOLVE_BLAS_THREADS` or one), or one thread while ``n`` rows are assigned
    (``solve=False``: k-means, whose output entries are each summed by one thread, so its bits do
    not depend on the count); the previous counts restored after; nothing below
    :data:`BLAS_FIXED_THREADS_MIN_NODES`.

    The setting is process-wide, so solves and assignments running at once in several threads (a
    sweep's thread pool) share it: the first to enter saves the counts and the last to leave
    restores them, under a lock. While any solve is inside, the solve's count holds (it is the same
    for every solve, so a solve's bits never depend on what else runs); with only assignments
    inside, one thread.
    """

    def __init__(self, n: int, solve: bool = True) -> None:
        self.calls = _openblas_thread_calls() if n >= BLAS_FIXED_THREADS_MIN_NODES else []
        self.kind = "solves" if solve else "others"
        self.counts: list[int] = []     # the counts set on entry, one per library

    @staticmethod
    def _apply(calls) -> list[int]:
        solving = _blas_holders["solves"] > 0
        counts = [_blas_count(path, saved, solving) for (path, _, _), saved in zip(calls, _blas_holders["saved"])]
        for (_, _, put), count in zip(calls, counts):
            put(count)
        return counts

    def __enter__(self) -> "_blas_threads":
        if self.calls:
            with _blas_lock:
                if _blas_holders["solves"] + _blas_holders["others"] == 0:
                    _blas_holders["saved"] = [int(get()) for _, get, _ in self.calls]
                _blas_holders[self.kind] += 1
                self.counts = self._apply(self.calls)
        return self

    def __exit__(self, *exc) -> None:
        if self.calls:
            with _blas_lock:
                _blas_holders[self.kind] -= 1
                if _blas_holders["solves"] + _blas_holders["others"] == 0:
                    for (_, _, put), count in zip(self.calls, _blas_holders["saved"]):
                        put(count)
                else:
                    self._apply(self.calls)


def _to_original_order(V: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Rows of ``V`` (computation order) back in the original node order, signs fixed there."""
    out = np.empty_like(V)
    out[order] = V
    return fix_signs(out)


def _in_order(x: np.ndarray, order) -> np.ndarray:
    """A vector or block drawn in the original node order, in the operator's order."""
    return x if order is None else x[order]


def _iterative(op: SymmetricOperator, m: int, ctx: SolverContext, stage: str,
               bound: float | None, extra: int, start: np.ndarray | None = None) -> EigenSolution:
    """ARPACK, then LOBPCG; see :func:`largest_eigenpairs`. With ``start``, :func:`_warm_arpack` first."""
    n = op.n

    def mv(x):
        ctx.tick(1, stage)
        return op.apply(x)

    def mm(X):
        ctx.tick(X.shape[1], stage)
        return op.apply(X)

    lin = LinearOperator((n, n), matvec=mv, matmat=mm, rmatvec=mv, dtype=np.float64)
    rng = np.random.default_rng(ctx.seed)
    v0 = _in_order(rng.uniform(-1.0, 1.0, n), op.order)
    ncv = min(n, max(2 * m + 1, 20))
    maxiter = max(1, ctx.max_matvecs // max(1, ncv - m))
    if start is not None:
        # the block comes in the original node order, like the random draws: move it to the operator's
        # the block comes in the original node order, like the random draws: move it to the operator's
        sol = _warm_arpack(op, lin, m, ctx, stage, extra, _in_order(np.asarray(start), op.order), v0, ncv, maxiter)
        if sol is not None:
            return sol
    start = ctx.matvecs
    X0 = None
    why = ""
    beyond = None
    product, scratch = np.empty(n), np.empty(n)

    def mv_reused(x):
        # ARPACK copies every product into its own work array at once: one output buffer serves all
        ctx.tick(1, stage)
        return op.apply_into(x, product, scratch)

    arpack_lin = LinearOperator((n, n), matvec=mv_reused, rmatvec=mv_reused, dtype=np.float64)
    try:
        w, V, beyond = _arpack_with_next(arpack_lin, m, v0, ncv, ctx.eig_tol, maxiter, ctx.seed)
        solver = "arpack-eigsh"
    except ArpackNoConvergence as exc:
        why = f"ARPACK did not converge ({len(exc.eigenvalues)} of {m} pairs)"
        X0 = exc.eigenvectors if exc.eigenvectors is not None and exc.eigenvectors.size else None
        solver = ""
    except ArpackError as exc:
        why = f"ARPACK failed ({exc})"
        solver = ""
    except _BudgetExceeded as exc:
        raise ComputeError(f"eigensolver stopped: {exc} after {ctx.matvecs - start} matvecs "
                           f"(n={n}, {m} eigenpairs); raise the limit or eig_tol") from None
    if not solver:
        ctx.warnings.append(f"{why}; falling back to LOBPCG")
        X = _in_order(rng.standard_normal((n, m)), op.order)
        if X0 is not None:
            X[:, :X0.shape[1]] = X0
        lob_tol = max(ctx.eig_tol, 1e-9) * (bound if bound else 1.0) * 10
        try:
            w, V = lobpcg(lin, X, tol=lob_tol, maxiter=max(20, ctx.max_matvecs // (3 * m)),
                          largest=True)
        except _BudgetExceeded as exc:
            raise ComputeError(f"eigensolver stopped: {why}, then LOBPCG: {exc}") from None
        except Exception as exc:  # LOBPCG raises assorted LinAlgErrors on breakdown
            raise ComputeError(f"eigensolvers failed: {why}; LOBPCG: {exc}") from None
        solver = "lobpcg"
    w, V, res = _ordered_with_residuals(op, w, V, ctx)
    if solver == "lobpcg":
        scale = bound if bound else max(1.0, float(np.max(np.abs(w))))
        if float(res.max()) > 1e-3 * scale:
            raise ComputeError(f"eigensolvers failed: {why}; LOBPCG residual {res.max():.2e} "
                               f"is too large (n={n}, {m} eigenpairs)")
    if extra > 0:
        more = _decisive_ritz(beyond, w, extra, ctx) if solver == "arpack-eigsh" else None
        if more is None:
            more = _deflated_values(op, V, w, extra, ctx, stage, rng)
        w = np.concatenate([w, more])
    sol = EigenSolution(w, V, solver, ctx.matvecs - start, [float(r) for r in res])
    _record(ctx, sol)
    ctx.report(stage)
    return sol


def _arpack_with_next(lin: LinearOperator, m: int, v0: np.ndarray, ncv: int, tol: float, maxiter: int,
                      seed: int = 0) -> tuple[np.ndarray, np.ndarray, tuple[np.ndarray, np.ndarray] | None]:
    r"""``eigsh(lin, k=m, which='LA', v0=v0, ncv=ncv, tol=tol, maxiter=maxiter)``, and the Ritz
    values beyond the ``m`` wanted ones, with their error bounds, from ARPACK's last Lanczos step.

    At convergence ARPACK (``dsaupd``; Lehoucq, Sorensen & Yang 1998, ARPACK Users' Guide, §4.5
    and the ``ipntr(6)``/``ipntr(7)`` work arrays) holds all ``ncv`` Ritz values :math:`\theta_i`
    of its last tridiagonal :math:`T` and their Ritz estimates
    :math:`|\beta\, e_{ncv}^T s_i| = \|M y_i - \theta_i y_i\|` (exact in exact arithmetic;
    :math:`y_i` the Ritz vector). After the last restart the factorisation was extended by
    ``ncv - m`` Lanczos steps from the wanted subspace, so the unwanted Ritz values are a
    Rayleigh–Ritz estimate of the next eigenvalues in the complement, with no further product
    (:func:`_decisive_ritz` decides whether they are good enough).

    Below :data:`RITZ_VECTORS_MIN_ROWS` rows the eigenpairs are those of ``eigsh`` bit for bit:
    this is its loop for a standard problem (scipy's ``_SymmetricArpackParams``, which ``eigsh``
    itself runs), ended by ARPACK's ``dseupd``. From that size the Ritz vectors are formed directly
    as :math:`Y = V_{ncv} S`, with :math:`T S = S \Theta` the eigendecomposition of the last
    tridiagonal (``scipy.linalg.eigh_tridiagonal``) and :math:`V_{ncv}` the Lanczos basis, the
    quantities ``dseupd`` itself starts from: one pass over the basis where ``dseupd`` applies
    ``m`` Householder reflectors to it and copies it into a second ``n × ncv`` array (1M nodes,
    8 pairs: ~0.05 s and 64 MB instead of ~0.44 s and 224 MB). The vectors then differ from
    ``eigsh``'s in their last bits (1e-17 at 100k nodes), the values not at all in the cases
    measured; when the values disagree by more than rounding, ``dseupd`` is used after all.

    Should ARPACK ask its caller for a random vector (scipy's ``ido == 4``), ``eigsh`` would draw it
    from an unseeded generator; here it comes from ``default_rng([seed, 0xA4])``. (scipy 1.17's
    ARPACK did not ask on an operator with three distinct eigenvalues and four wanted, where the
    Krylov space becomes invariant: it restarts by itself.)

    The third result is ``(values, bounds)`` of the unwanted Ritz values, largest first, or None
    when the private interface is missing or its Ritz values do not reproduce the returned
    eigenvalues (a changed work-array layout); callers then estimate the next eigenvalues by
    products.
    """
    try:
        from scipy.sparse.linalg._eigen.arpack.arpack import _SymmetricArpackParams
    except ImportError:  # pragma: no cover - a scipy without the private class
        return (*eigsh(lin, k=m, which="LA", v0=v0, ncv=ncv, tol=tol, maxiter=maxiter), None)
    params = _SymmetricArpackParams(lin.shape[0], m, lin.dtype.char, lin.matvec, 1, None, None, None,
                                    ncv, v0, maxiter, "LA", tol, np.random.default_rng([seed, 0xA4]))
    while not params.converged:
        params.iterate()
    beyond = None
    try:
        ipntr, workl = params.ipntr, params.workl
        ritz = np.array(workl[ipntr[5]:ipntr[5] + ncv], dtype=np.float64)
        bounds = np.abs(np.array(workl[ipntr[6]:ipntr[6] + ncv], dtype=np.float64))
    except (AttributeError, IndexError, TypeError):  # pragma: no cover - a changed private layout
        ritz = bounds = None
    pairs = _ritz_pairs(params, m, ncv, ritz) if lin.shape[0] >= RITZ_VECTORS_MIN_ROWS else None
    w, V = pairs if pairs is not None else params.extract(True)
    if ritz is not None and ritz.size == ncv and w.size == m:
        wanted = np.sort(ritz[:m])
        if np.allclose(wanted, np.sort(w), rtol=1e-10, atol=1e-12 * max(1.0, float(np.max(np.abs(w))))):
            order = np.argsort(ritz[m:])[::-1]
            beyond = (ritz[m:][order], bounds[m:][order])
    return w, V, beyond


#: From this many rows the Ritz vectors of a cold ARPACK solve are formed from the Lanczos basis in
#: one product instead of by ARPACK's ``dseupd`` (see :func:`_arpack_with_next`); the same size as
#: :data:`BLAS_FIXED_THREADS_MIN_NODES`, below which (every test graph, the demo) results stay the
#: bits of ``eigsh``.
RITZ_VECTORS_MIN_ROWS = 100_000


def _ritz_pairs(params, m: int, ncv: int, ritz: np.ndarray | None) -> tuple[np.ndarray, np.ndarray] | None:
    """The ``m`` wanted Ritz pairs from a converged ARPACK state, ascending like ``eigsh``, or None
    when the state does not look as expected (then the caller runs ``dseupd``)."""
    try:
        if ritz is None or int(params.arpack_dict["nconv"]) < m or params.v.size != params.n * ncv:
            return None
        ih = int(params.ipntr[4])
        H = np.array(params.workl[ih:ih + 2 * ncv], dtype=np.float64)
        basis = params.v.reshape(-1).reshape(ncv, params.n).T     # ARPACK's column-major n x ncv
    except (AttributeError, IndexError, KeyError, TypeError, ValueError):  # pragma: no cover
        return None
    try:
        theta, S = sla.eigh_tridiagonal(H[ncv:], H[1:ncv])
    except (np.linalg.LinAlgError, ValueError):  # pragma: no cover - LAPACK failure: dseupd
        return None
    top = np.argsort(theta)[::-1][:m][::-1]          # the m largest, ascending
    w = theta[top]
    scale = max(1.0, float(np.max(np.abs(w))))
    if not np.allclose(w, np.sort(ritz[:m]), rtol=0.0, atol=1e-12 * scale):
        return None
    return w, basis @ S[:, top]


def _decisive_ritz(beyond: tuple[np.ndarray, np.ndarray] | None, w: np.ndarray, extra: int,
                   ctx: SolverContext) -> np.ndarray | None:
    r"""The first ``extra`` unwanted Ritz values of :func:`_arpack_with_next` when decisive, else None.

    Same rule as :func:`_quick_deflated`: each Ritz value has an eigenvalue within its error bound
    :math:`b` (Kahan's bound; Parlett 1998, The Symmetric Eigenvalue Problem, thm. 4.5.1), and they
    are kept only when the last wanted value exceeds the largest of them by more than :math:`3 \max b`
    (no tie at the cut-off). ``ctx.extra_accuracy`` records :math:`\max b`.
    """
    if beyond is None:
        return None
    theta, bounds = beyond
    if theta.size < extra:
        return None
    theta, bounds = theta[:extra], bounds[:extra]
    worst = float(bounds.max())
    if not (np.all(np.isfinite(theta)) and np.isfinite(worst)) or float(w[-1]) - float(theta[0]) <= 3.0 * worst:
        return None
    ctx.extra_accuracy = worst
    return theta.astype(np.float64)


def _ordered_with_residuals(op: SymmetricOperator, w, V,
                            ctx: SolverContext) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Eigenpairs sorted by decreasing value, signs fixed, and their residual norms ``‖M x − μ x‖``
    recomputed with one block product (counted in ``ctx.matvecs``).

    From :data:`COLUMNWISE_MIN_ROWS` rows, where the block product goes column by column anyway,
    each residual is formed from one column in vector-sized temporaries instead of five block-sized
    ones (1M nodes, 8 pairs: 0.37-0.53 s instead of 0.44-0.98 s, mostly page faults of the block
    temporaries); the norms then differ from the block form's in their last bits, the pairs not at all.
    """
    order = np.argsort(w)[::-1]
    w = np.asarray(w, dtype=np.float64)[order]
    V = np.ascontiguousarray(np.asarray(V, dtype=np.float64)[:, order])
    fix_signs(V)
    if V.shape[0] >= COLUMNWISE_MIN_ROWS:
        res = np.empty(V.shape[1])
        column, r, scratch = np.empty(V.shape[0]), np.empty(V.shape[0]), np.empty(V.shape[0])
        for j in range(V.shape[1]):
            np.copyto(column, V[:, j])
            op.apply_into(column, r, scratch)
            column *= w[j]
            r -= column
            res[j] = np.sqrt(np.dot(r, r))
    else:
        R = op.apply(V)
        R -= V * w
        res = np.linalg.norm(R, axis=0)
        del R
    ctx.matvecs += V.shape[1]
    return w, V, res


#: Weight of the seeded random vector mixed into a warm start vector (so no direction is missing).
WARM_NOISE = 1e-3


def _warm_block(start: np.ndarray, n: int, m: int, seed: int) -> np.ndarray:
    """The start block as an ``n × m`` float64 array: first ``m`` columns, zero columns and missing
    columns filled with seeded uniform noise (``default_rng([seed, 0x3A7])``) of the block's scale."""
    X = np.asarray(start, dtype=np.float64)
    if X.ndim == 1:
        X = X[:, None]
    if X.ndim != 2 or X.shape[0] != n:
        raise ComputeError(f"the warm-start block has shape {X.shape}; the operator has {n} rows")
    if not np.all(np.isfinite(X)):
        raise ComputeError("the warm-start block has NaN or infinite entries")
    X = np.array(X[:, :m], dtype=np.float64)
    norms = np.linalg.norm(X, axis=0)
    fill = [j for j in range(m) if j >= X.shape[1] or not norms[j] > 0]
    if fill:
        scale = float(np.max(norms)) / np.sqrt(n) if norms.size and np.max(norms) > 0 else 1.0
        noise = np.random.default_rng([seed, 0x3A7]).uniform(-1.0, 1.0, (n, len(fill))) * scale
        if X.shape[1] < m:
            X = np.concatenate([X, np.zeros((n, m - X.shape[1]))], axis=1)
        X[:, fill] = noise
    return X


def warm_start_vector(start: np.ndarray, m: int, seed: int, noise: np.ndarray) -> np.ndarray:
    r"""One Lanczos start vector from a block of approximate eigenvectors.

    :math:`v_0 = Q\mathbf{1}/\sqrt{m} + \epsilon\, z/\|z\|`, where
    :math:`X = QR` is the thin QR factorisation of the start block (first
    ``m`` columns; missing or zero columns are seeded noise),
    :math:`\mathbf{1}` the all-ones vector of length ``m`` (every
    approximate eigenvector with the same weight), :math:`z` the cold
    solve's seeded random start vector and :math:`\epsilon` =
    :data:`WARM_NOISE`, so that no eigenvector is missing from the Krylov
    space (Lanczos cannot find a direction orthogonal to its start vector).

    Parameters
    ----------
    start : ndarray, shape (n, b)
    m : int
        Number of wanted eigenpairs.
    seed : int
        Seeds the fill of missing columns.
    noise : ndarray, shape (n,)
        The random start vector :math:`z` of the cold solve.

    Returns
    -------
    ndarray of float64, shape (n,)
    """
    n = noise.shape[0]
    Q, _ = np.linalg.qr(_warm_block(start, n, m, seed))
    v0 = Q.sum(axis=1) / np.sqrt(Q.shape[1])
    v0 += WARM_NOISE * noise / max(float(np.linalg.norm(noise)), 1e-300)
    return v0


def start_distance(W: np.ndarray, V: np.ndarray) -> float:
    r"""How far a start block is from an invariant subspace: :math:`\delta = \|(I - VV^T)\,Q\|_2`.

    :math:`Q` is an orthonormal basis of the columns of ``W`` (thin QR) and
    ``V`` has orthonormal columns (e.g. converged eigenvectors). For
    ``W`` and ``V`` of the same width, :math:`\delta = \sin\theta_{max}`, the
    sine of the largest principal angle between the two column spaces
    (Björck & Golub 1973); 0 when ``range(W)`` lies in ``range(V)``, 1 when
    some direction of ``W`` is orthogonal to ``range(V)``. It is the
    :math:`\delta` of the warm-start cost estimate in :func:`_warm_arpack`.

    Parameters
    ----------
    W : ndarray, shape (n, b)
        Start block (any scaling; full column rank).
    V : ndarray, shape (n, m)
        Orthonormal columns.

    Returns
    -------
    float
        :math:`\delta \in [0, 1]`, computed as :math:`\sqrt{\lambda_{max}(R^T R)}`
        of the explicit :math:`R = Q - V(V^TQ)` (accurate for small
        :math:`\delta`, unlike :math:`\sqrt{1 - \sigma_{min}(V^TQ)^2}`).

    References
    ----------
    Björck & Golub (1973), Numerical methods for computing angles between
    linear subspaces, Math. Comp. 27(123).
    """
    W = np.asarray(W, dtype=np.float64)
    W = W[:, None] if W.ndim == 1 else W
    V = np.asarray(V, dtype=np.float64)
    V = V[:, None] if V.ndim == 1 else V
    if W.shape[0] != V.shape[0]:
        raise ValueError(f"W has {W.shape[0]} rows and V {V.shape[0]}")
    Q, _ = np.linalg.qr(W)
    R = Q - V @ (V.T @ Q)
    top = float(np.linalg.eigvalsh(R.T @ R)[-1])
    return float(min(1.0, np.sqrt(max(top, 0.0))))


def _warm_arpack(op: SymmetricOperator, lin: LinearOperator, m: int, ctx: SolverContext, stage: str,
                 extra: int, start: np.ndarray, noise: np.ndarray, ncv: int, maxiter: int
                 ) -> EigenSolution | None:
    r"""The warm-started solve of :func:`largest_eigenpairs`, or None to solve cold.

    ARPACK ``eigsh(which='LA')`` exactly as the cold solve (same ``ncv``,
    ``tol = ctx.eig_tol``, iteration budget, hence the same convergence test
    :math:`\|M x_i - \mu_i x_i\| \le \mathrm{tol}\,|\mu_i|`; Lehoucq, Sorensen &
    Yang 1998) but started from :func:`warm_start_vector`. Accepted only when
    (1) ARPACK converges, (2) the explicitly recomputed residuals pass the
    same test, and (3) no eigenvalue of the deflated operator
    :math:`(I - VV^T) M (I - VV^T)` exceeds :math:`\mu_m` by more than three
    tolerances (a start blind to a wanted direction would otherwise converge
    to the wrong invariant subspace). Otherwise ``ctx.warm_start["fallback"]``
    says why, a warning is added, and the caller solves cold with a fresh
    matvec budget.

    What a warm start can save. For one wanted eigenvector the Krylov bound
    (Saad 2011, Numerical Methods for Large Eigenvalue Problems, Sec. 6.6)
    gives about :math:`\log(\delta/\mathrm{tol}) / \log(1/\rho)` steps for a
    start at distance :math:`\delta` (:func:`start_distance`) from the wanted
    invariant subspace, against :math:`\log(\delta_{cold}/\mathrm{tol}) / \log(1/\rho)`
    from a random start (:math:`\delta_{cold} \approx \sqrt{n/m}`). For ``m``
    wanted eigenvalues in a tight cluster (the ``k - 1`` informative
    eigenvalues of a planted partition lie within ~0.005 of each other, ~0.03
    above the bulk edge) a single-vector Krylov method must also separate the
    cluster, which costs a number of steps that does not shrink with
    :math:`\delta`; a block method separates the cluster for free but spends
    ``m`` products per step. Measured on the planted network of
    ``tests/benchmarks/bench_warmstart.py --explain`` (``k = 8``, degree 15,
    c_in/c_out = 6; bare solver products, warm/cold, starts ``V + \delta E``
    around the exact eigenvectors, 200k nodes): ARPACK 0.85 / 0.73 / 0.65 / 0.59
    at :math:`\delta` = 1e-1 / 1e-3 / 1e-6 / 1e-8; LOBPCG (Knyazev 2001) from
    the block 1.22 / 0.61 / 0.11 / 0.11. One percent of edges rewired gives
    :math:`\delta \approx 0.14` (previous eigenvectors) to 0.63 (previous
    membership), where ARPACK from this start vector needs 0.90× its cold
    products from either source (0.87–0.92× at 1M nodes) and LOBPCG from the block
    1.2–2.4×; a ratio of 0.5 needs :math:`\delta \lesssim 10^{-4}` (LOBPCG)
    and is out of ARPACK's reach even from the exact eigenvectors.
    About half of a run's products go to the extra eigenvalue
    (:func:`_deflated_values`), which a warm start does not shorten; its cost
    varies by ±20% with the random start.

    Tried and not kept (100k nodes, 1% rewired, bare ARPACK products
    warm/cold; one-off variants of the ``--explain`` solve): weights of the block's columns in :math:`v_0` — equal 0.86
    (previous eigenvectors) / 0.91 (membership), alternating or seeded random
    signs 0.86–0.91, Rayleigh–Ritz of the block first with equal weights
    (+ ``m`` products) 0.92 / 1.01, Ritz vectors weighted by inverse
    residuals 0.92 / 1.06; ``ncv`` 17, 20, 24, 28, 32 for the warm solve:
    0.85, 0.86, 0.82, 0.88, 0.86 (cold 138–145 products); the extra
    eigenvalue's solve started from the projected block instead of a random
    vector: 97 instead of 109 products at its 1e-3 step (200k nodes), within
    its seed-to-seed spread.
    """
    first = ctx.matvecs

    def give_up(reason: str) -> None:
        ctx.warm_start = {"used": False, "fallback": reason, "matvecs": int(ctx.matvecs - first)}
        ctx.warnings.append(f"warm start not used ({reason}); solved from a random start instead")
        ctx.extra_accuracy = None
        ctx._problem_matvecs = 0      # the cold solve gets the whole matvec budget

    v0 = warm_start_vector(start, m, ctx.seed, noise)
    tol = ctx.eig_tol
    try:
        w, V = eigsh(lin, k=m, which="LA", v0=v0, ncv=ncv, tol=tol, maxiter=maxiter)
    except ArpackNoConvergence as exc:
        give_up(f"ARPACK did not converge from the start block ({len(exc.eigenvalues)} of {m} pairs)")
        return None
    except ArpackError as exc:
        give_up(f"ARPACK failed from the start block ({exc})")
        return None
    except _BudgetExceeded as exc:
        give_up(str(exc))
        return None
    w, V, res = _ordered_with_residuals(op, w, V, ctx)
    if not np.all(np.isfinite(res)) or np.any(res > tol * np.abs(w)):
        worst = int(np.argmax(res / np.maximum(np.abs(w), 1e-300)))
        give_up(f"residual {res[worst]:.2e} > eig_tol*|mu| = {tol * abs(w[worst]):.2e}")
        return None
    more = _deflated_values(op, V, w, max(extra, 1), ctx, stage, np.random.default_rng([ctx.seed, 0xDEF]))
    if more.size and float(more[0]) > float(w[-1]) + 3.0 * tol * abs(float(w[-1])):
        give_up(f"the start block missed an eigenvalue ({float(more[0]):.6g} above the m-th, "
                f"{float(w[-1]):.6g})")
        return None
    if extra > 0:
        w = np.concatenate([w, more[:extra]])
    ctx.warm_start = {"used": True, "fallback": None, "matvecs": int(ctx.matvecs - first)}
    sol = EigenSolution(w, V, "arpack-eigsh-warm", ctx.matvecs - first, [float(r) for r in res])
    _record(ctx, sol)
    ctx.report(stage)
    return sol


def _quick_deflated(lin: LinearOperator, v0: np.ndarray, w: np.ndarray, extra: int,
                    ctx: SolverContext, iterations: int = 8, order=None) -> np.ndarray | None:
    r"""A few LOBPCG steps (Knyazev 2001) for the next eigenvalues, kept only when decisive.

    The Rayleigh–Ritz values :math:`\theta` lie below the eigenvalues they
    approach; each has an eigenvalue within its residual norm :math:`\|r\|`
    (Kahan's bound for symmetric matrices; Parlett 1998, The Symmetric Eigenvalue
    Problem, thm. 4.5.1). When the last wanted value :math:`w_m` exceeds
    :math:`\theta_1` by more than :math:`3\|r\|` there is no tie at the cut-off
    and the estimate is good enough for the eigengap; otherwise None (the
    caller then runs ARPACK with tightening tolerances). Costs about
    ``iterations + 3`` operator products instead of ARPACK's ~20 at a bulk edge.
    """
    import warnings

    if lin.shape[0] < 50 * (extra + 1):
        return None
    X = np.empty((lin.shape[0], extra))
    X[:, 0] = v0
    if extra > 1:
        X[:, 1:] = _in_order(np.random.default_rng([ctx.seed, extra]).uniform(
            -1.0, 1.0, (lin.shape[0], extra - 1)), order)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            theta, Y = lobpcg(lin, X, largest=True, maxiter=iterations, tol=1e-12)
    except _BudgetExceeded:
        raise
    except Exception:  # LOBPCG breakdowns: let ARPACK try
        return None
    order = np.argsort(theta)[::-1]
    theta, Y = np.asarray(theta)[order], np.asarray(Y)[:, order]
    R = lin.matmat(Y) - Y * theta
    res = np.linalg.norm(R, axis=0)
    if not np.all(np.isfinite(theta)) or float(w[-1]) - float(theta[0]) <= 3.0 * float(res.max()):
        return None
    ctx.extra_accuracy = float(res.max())
    return theta.astype(np.float64)


def _deflated_values(op: SymmetricOperator, V: np.ndarray, w: np.ndarray, extra: int,
                     ctx: SolverContext, stage: str, rng: np.random.Generator) -> np.ndarray:
    """Next ``extra`` eigenvalues after ``w`` from the deflated operator (see largest_eigenpairs)."""
    n = op.n
    extra = min(extra, n - V.shape[1] - 1)
    if extra <= 0:
        return np.array([], dtype=np.float64)

    VT = np.ascontiguousarray(V.T)       # (m, n): two contiguous gemv per projection

    def project(x):  # vectors (n,) and blocks (n, b)
        return x - VT.T @ (VT @ x)

    def mv(x):
        # Krylov vectors built from a projected start stay in range(P), so
        # P M P x = P M x up to rounding: one projection per step suffices
        ctx.tick(1, stage)
        return project(op.apply(x))

    def mm(X):
        ctx.tick(X.shape[1], stage)
        return project(op.apply(X))

    lin = LinearOperator((n, n), matvec=mv, matmat=mm, rmatvec=mv, dtype=np.float64)
    v0 = project(_in_order(rng.uniform(-1.0, 1.0, n), op.order))
    quick = _quick_deflated(lin, v0, w, extra, ctx, order=op.order)
    if quick is not None:
        return quick
    est = None
    for tol in sorted({1e-2, 1e-3, 1e-4, ctx.eig_tol}, reverse=True):
        if tol < ctx.eig_tol:
            continue
        try:
            est = np.sort(eigsh(lin, k=extra, which="LA", v0=v0, tol=tol,
                                ncv=min(n, max(2 * extra + 1, 12)), return_eigenvectors=False,
                                maxiter=max(1, ctx.max_matvecs // 20)))[::-1]
        except (ArpackNoConvergence, ArpackError):
            break
        except _BudgetExceeded:
            break
        delta = tol * max(abs(float(est[0])), 1e-300)
        if float(w[-1]) - float(est[0]) > 3.0 * delta:
            break
    if est is None:
        ctx.warnings.append("could not estimate the eigenvalues beyond the ones used")
        return np.array([], dtype=np.float64)
    return np.asarray(est, dtype=np.float64)


def _record(ctx: SolverContext, sol: EigenSolution) -> None:
    ctx.solvers.append(sol.solver)
    ctx.residual_norms.extend(sol.residual_norms)


def shifted_laplacian_operator(A, laplacian: str, d: np.ndarray | None = None,
                               regularizer: float = 0.0, order: np.ndarray | None = None):
    r"""Operator whose largest eigenpairs are the smallest of a Laplacian.

    Returns ``(op, shift, post)`` with :math:`\lambda(L) = \mathrm{shift} - \mu(M)`:

    - ``"sym"``/``"rw"``: :math:`M = I + D^{-1/2} A D^{-1/2}` (+1 on isolated
      nodes), shift 2, spectrum in [0, 2]; from :data:`SCALED_PRODUCT_MIN_NODES`
      nodes on (and without ``order``) the scaling is applied inside each product
      instead of stored;
    - ``"unnormalized"``: :math:`M = cI - L = (c - D) + A` with
      :math:`c = 2 d_{max}` (Gershgorin bound on the spectrum of ``L``).

    ``post`` maps the eigenvectors of ``M`` to those of the Laplacian
    (``D^-1/2 V`` for ``"rw"``, identity otherwise).

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
    laplacian : {"unnormalized", "sym", "rw"}
    d : ndarray, shape (n,), optional
        Degrees.
    regularizer : float, default 0
        :math:`\tau` of :math:`D_\tau = D + \tau I` (normalised kinds only).
    order : ndarray of int, shape (n,), optional
        A computation order (:func:`workspace.spectral.ordering.computation_order`):
        the operator is built permuted, :math:`P M P^T`, in one copy of ``A``
        (see :class:`SymmetricOperator`); eigenvectors still come out in the
        original order.

    Returns
    -------
    op : SymmetricOperator
    shift : float
    post : callable or None

    Raises
    ------
    ValueError
        Unknown Laplacian.

    References
    ----------
    Chung (1997), Spectral Graph Theory (spectrum of L_sym in [0, 2]);
    Gershgorin (1931) for the bound on the spectrum of L.
    """
    A = A if isinstance(A, sp.csr_array) else sp.csr_array(A, dtype=np.float64)
    if d is None:
        d = degrees(A)
    if laplacian in ("sym", "rw"):
        isolated = d + regularizer <= 0
        diag = 1.0 + isolated.astype(np.float64) if isolated.any() else 1.0
        if order is None and A.shape[0] >= SCALED_PRODUCT_MIN_NODES:
            op = SymmetricOperator(A, diagonal=diag, row_scale=inverse_sqrt_degrees(d + regularizer))
        elif order is None:
            op = SymmetricOperator(normalized_adjacency(A, d, regularizer=regularizer), diagonal=diag)
        else:
            N = permuted_scaled(A, order, inverse_sqrt_degrees(d + regularizer))
            op = SymmetricOperator(N, diagonal=diag if np.ndim(diag) == 0 else diag[order],
                                   order=order)
        if laplacian == "rw":
            s = inverse_sqrt_degrees(d)

            def post(V, s=s):
                return V * s[:, None]
        else:
            post = None
        return op, 2.0, post
    if laplacian == "unnormalized":
        c = 2.0 * float(d.max()) if d.size else 0.0
        c = c if c > 0 else 1.0
        if order is None:
            op = SymmetricOperator(A, diagonal=c - d)
        else:
            op = SymmetricOperator(permuted_scaled(A, order), diagonal=(c - d)[order], order=order)
        return op, c, None
    raise ValueError(f"unknown Laplacian {laplacian!r}")


def laplacian_eigenpairs(A, m: int, *, laplacian: str = "sym", seed: int = 0,
                         dense_threshold: int = 1000, eig_tol: float = 1e-10,
                         max_matvecs: int = 50000, time_limit_s: float = 0.0,
                         progress=None, cancel=None, threads: int = 0) -> EigenSolution:
    r"""The ``m`` smallest eigenpairs of a graph Laplacian.

    Solves :math:`L x = \lambda x` for :math:`L = D - A`, or
    :math:`L_{sym} = I - D^{-1/2} A D^{-1/2}`, or the random-walk form
    :math:`L_{rw} = I - D^{-1} A` (equivalently the generalised problem
    :math:`L u = \lambda D u`, with :math:`u = D^{-1/2} v` for the
    eigenvectors ``v`` of :math:`L_{sym}`), through the chain of
    :func:`largest_eigenpairs` on a shifted operator.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency, weights >= 0; a self-loop of weight ``w`` as
        ``A_ii = w``, counted twice (see :mod:`workspace.spectral.laplacians`).
    m : int
        Number of eigenpairs, ``1 <= m <= n``.
    laplacian : {"unnormalized", "sym", "rw"}, default "sym"
    seed : int, default 0
    dense_threshold : int, default 1000
    eig_tol : float, default 1e-10
    max_matvecs : int, default 50000
    time_limit_s : float, default 0 (no limit)
    progress, cancel : callables, optional
        As in :func:`workspace.spectral.partition`.
    threads : int, default 0
        Threads for large sparse products (0 = automatic, see :class:`SolverContext`).

    Returns
    -------
    EigenSolution
        ``values`` ascending, shape (m,); ``vectors`` shape (n, m):
        orthonormal for ``"unnormalized"``/``"sym"``, D-orthonormal
        (:math:`U^T D U = I`) for ``"rw"``.

    Raises
    ------
    workspace.errors.ComputeError, workspace.errors.Cancelled

    References
    ----------
    Chung (1997), Spectral Graph Theory, AMS; von Luxburg (2007), A tutorial
    on spectral clustering, Statistics and Computing 17(4).
    """
    ctx = SolverContext(seed=seed, dense_threshold=dense_threshold, eig_tol=eig_tol,
                        max_matvecs=max_matvecs, time_limit_s=time_limit_s,
                        progress=progress, cancel=cancel, threads=threads)
    A = with_loops_doubled(sp.csr_array(A, dtype=np.float64))
    op, shift, post = shifted_laplacian_operator(A, laplacian)
    sol = largest_eigenpairs(op, m, ctx, bound=shift)
    values = shift - sol.values
    V = sol.vectors if post is None else post(sol.vectors)
    return EigenSolution(values, V, sol.solver, sol.matvecs, sol.residual_norms)
