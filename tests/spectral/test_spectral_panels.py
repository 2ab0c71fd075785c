"""Column panels (``eigen.PanelMatrix``): products the same bits as scipy's, the matrix given back.

From ``PANEL_MIN_ROWS`` rows the iterative solver multiplies the sparse part of its operator panel
by panel, after regrouping the matrix's own arrays in place. Checked here, with the threshold, the
panel width and the row ranges lowered so that small graphs take the path:

* every product equals scipy's ``csr_array @ x`` / ``@ X`` (scipy.sparse, the reference kernel)
  bit for bit (``numpy.array_equal``), for vectors and blocks, one and two threads, on a scipy
  random sparse matrix and on a planted partition (Holland, Laskey & Leinhardt 1983);
* after ``restore`` and after every solve (also one stopped by ``cancel``) the matrix holds the
  same ``data`` and ``indices`` as before, value for value;
* a whole ``njw`` partition gives the same labels and eigenvalue bits as without panels (the
  eigensolver then runs on scipy's products);
* a matrix with unsorted rows is not panelled (its products keep their order) and is not touched.
"""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
import scipy.sparse as sp

import workspace.spectral.eigen as eigen
from workspace.errors import Cancelled
from workspace.spectral import partition, planted_partition


def _random_symmetric(n: int, density: float, seed: int) -> sp.csr_array:
    rng = np.random.default_rng(seed)
    A = sp.random_array((n, n), density=density, rng=rng, format="csr")
    A = sp.csr_array(A + A.T)
    A.sort_indices()
    return A


@pytest.fixture
def small_panels(monkeypatch):
    """The panel path on small graphs: threshold 0, panels of 64 columns, ranges of 100 rows."""
    monkeypatch.setattr(eigen, "PANEL_MIN_ROWS", 0)
    monkeypatch.setattr(eigen, "PANEL_BYTES", 8 * 64)
    monkeypatch.setattr(eigen, "PANEL_RANGE_ROWS", 100)


@pytest.mark.parametrize("panel_columns,range_rows", [(64, 100), (7, 1000), (3, 400), (10 ** 6, 37)])
def test_panelled_products_are_scipys_bits(panel_columns, range_rows):
    A = _random_symmetric(2000, 0.01, seed=panel_columns)
    data0, indices0 = A.data.copy(), A.indices.copy()
    rng = np.random.default_rng(1)
    x, X = rng.standard_normal(2000), rng.standard_normal((2000, 5))
    ref_x, ref_X = A @ x, A @ X                  # scipy.sparse: csr_matvec / csr_matvecs
    P = eigen.PanelMatrix(A, 8 * panel_columns, range_rows)
    assert P.panels == -(-2000 // min(2000, panel_columns)) or panel_columns > 2000
    with ThreadPoolExecutor(max_workers=2) as pool:
        for parts in (1, 2, 3):
            assert np.array_equal(P.times(x, pool, parts), ref_x)
            assert np.array_equal(P.times(X, pool, parts), ref_X)
            assert np.array_equal(P.times(X[:, :1], pool, parts), ref_X[:, :1])
    assert np.array_equal(P @ x, ref_x)
    P.restore()
    assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)
    assert np.array_equal(A @ x, ref_x)
    with pytest.raises(RuntimeError):
        P @ x


def test_regrouping_is_in_place_and_by_panel():
    """The entries are regrouped inside the matrix's own arrays (no second copy), each (range,
    panel) piece holds only columns of its panel, in row order and column order within a row."""
    A = _random_symmetric(1500, 0.02, seed=5)
    data_buf, indices_buf = A.data, A.indices
    P = eigen.PanelMatrix(A, 8 * 100, 250)
    assert P.data is data_buf and P.indices is indices_buf
    for a, b, p0, p1, offsets in P.ranges:
        rows = b - a
        for p in range(P.panels):
            lo, hi = int(offsets[p * rows]), int(offsets[(p + 1) * rows])
            cols = A.indices[p0 + lo:p0 + hi].astype(np.int64)
            row = np.repeat(np.arange(rows), np.diff(offsets[p * rows:(p + 1) * rows + 1]))
            assert np.all(cols // P.width == p)
            step_row, step_col = np.diff(row), np.diff(cols)
            assert np.all((step_row > 0) | ((step_row == 0) & (step_col > 0)))   # row order, columns sorted
    P.restore()


def test_planted_partition_products_one_and_two_threads(small_panels):
    A, _ = planted_partition(6000, 4, 20.0, 2.0, seed=3)
    A = sp.csr_array(A, dtype=np.float64)
    A.sort_indices()
    data0, indices0 = A.data.copy(), A.indices.copy()
    rng = np.random.default_rng(2)
    x, X = rng.standard_normal(6000), rng.standard_normal((6000, 4))
    s = 1.0 / np.sqrt(np.maximum(A.sum(axis=1), 1.0))
    op = eigen.SymmetricOperator(A, diagonal=1.0, row_scale=s)
    ref_x = s * (A @ (s * x)) + x
    ref_X = s[:, None] * (A @ (X * s[:, None])) + X
    for threads in (1, 2):
        with ThreadPoolExecutor(max_workers=1) as pool:
            with eigen._panelled(op, pool if threads == 2 else None, threads) as run_op:
                assert isinstance(run_op.S, eigen._BoundPanels)
                assert not np.array_equal(A.indices, indices0)      # regrouped meanwhile
                assert np.array_equal(run_op.apply(x), ref_x)
                assert np.array_equal(run_op.apply(X), ref_X)
        assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)


def test_partition_same_bits_with_panels_and_matrix_given_back(monkeypatch):
    A, _ = planted_partition(20000, 4, 34, 4, seed=2)
    A = sp.csr_array(A, dtype=np.float64)
    A.sort_indices()
    data0, indices0 = A.data.copy(), A.indices.copy()
    monkeypatch.setattr(eigen, "SCALED_PRODUCT_MIN_NODES", 0)      # the large-graph operator
    plain = {t: partition(A, "njw", k=4, threads=t, components="largest") for t in (1, 2)}
    built = []
    real = eigen.PanelMatrix.__init__
    monkeypatch.setattr(eigen.PanelMatrix, "__init__", lambda self, *a, **kw: (built.append(1), real(self, *a, **kw))[1])
    monkeypatch.setattr(eigen, "PANEL_MIN_ROWS", 0)
    monkeypatch.setattr(eigen, "PANEL_BYTES", 8 * 3000)
    monkeypatch.setattr(eigen, "PANEL_RANGE_ROWS", 1000)
    for t in (1, 2):
        res = partition(A, "njw", k=4, threads=t, components="largest")
        assert np.array_equal(res.labels, plain[t].labels)
        assert res.eigenvalues.tobytes() == plain[t].eigenvalues.tobytes()
        assert res.diagnostics["matvecs"] == plain[t].diagnostics["matvecs"]
        assert res.quality == plain[t].quality
    assert len(built) == 2
    assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)


def test_cancelled_solve_gives_the_matrix_back(small_panels):
    A, _ = planted_partition(5000, 4, 20.0, 2.0, seed=4)
    A = sp.csr_array(A, dtype=np.float64)
    A.sort_indices()
    data0, indices0 = A.data.copy(), A.indices.copy()
    calls = [0]

    def cancel():
        calls[0] += 1
        return calls[0] > 20

    with pytest.raises(Cancelled):
        partition(A, "njw", k=4, cancel=cancel, components="largest")
    assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)
    assert not eigen._panel_users


def test_unsorted_rows_are_not_panelled(small_panels):
    A = _random_symmetric(1200, 0.02, seed=6)
    A = sp.csr_array((A.data[::-1].copy(), A.indices[::-1].copy(), A.indptr), shape=A.shape)  # rows reversed
    A = sp.csr_array(A[np.arange(1200)[::-1]][:, np.arange(1200)[::-1]])                    # a real matrix again
    rev = sp.csr_array((A.data.copy(), A.indices.copy(), A.indptr.copy()), shape=A.shape)
    for i in range(rev.shape[0]):                                 # every row's entries in reverse column order
        a, b = rev.indptr[i], rev.indptr[i + 1]
        rev.data[a:b], rev.indices[a:b] = rev.data[a:b][::-1].copy(), rev.indices[a:b][::-1].copy()
    rev.has_sorted_indices = False
    assert not eigen.panels_apply(rev, rev.shape[0])
    indices0 = rev.indices.copy()
    op = eigen.SymmetricOperator(rev)
    with eigen._panelled(op, None, 1) as run_op:
        assert run_op is op
    assert np.array_equal(rev.indices, indices0)


def test_solves_at_once_share_the_panels_and_the_last_restores(small_panels):
    A = _random_symmetric(3000, 0.01, seed=7)
    data0, indices0 = A.data.copy(), A.indices.copy()
    x = np.random.default_rng(3).standard_normal(3000)
    ref = A @ x
    op1, op2 = eigen.SymmetricOperator(A), eigen.SymmetricOperator(A)
    first = eigen._panelled(op1, None, 1)
    second = eigen._panelled(op2, None, 1)
    r1 = first.__enter__()
    r2 = second.__enter__()
    assert r1.S.panels is r2.S.panels and len(eigen._panel_users) == 1
    first.__exit__(None, None, None)
    assert not np.array_equal(A.indices, indices0)      # still in use by the second solve
    assert np.array_equal(r2.apply(x), ref)
    second.__exit__(None, None, None)
    assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)
    assert not eigen._panel_users

    # two solves of one operator in two threads: the same bits as one after the other
    op = eigen.SymmetricOperator(A, diagonal=1.0)
    alone = eigen.largest_eigenpairs(op, 3, eigen.SolverContext(seed=1, dense_threshold=10))
    out = [None, None]

    def solve(i):
        out[i] = eigen.largest_eigenpairs(op, 3, eigen.SolverContext(seed=1, dense_threshold=10))

    workers = [threading.Thread(target=solve, args=(i,)) for i in range(2)]
    for w in workers:
        w.start()
    for w in workers:
        w.join()
    for sol in out:
        assert sol.values.tobytes() == alone.values.tobytes()
        assert np.array_equal(sol.vectors, alone.vectors)
    assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)


def test_a_failure_while_regrouping_leaves_the_matrix_as_it_was(monkeypatch):
    """An error half way through the regrouping (here the third row range) puts back the ranges
    already regrouped; a read-only matrix is not panelled at all."""
    A = _random_symmetric(2000, 0.01, seed=8)
    data0, indices0 = A.data.copy(), A.indices.copy()
    real = eigen._panel_moves
    calls = [0]

    def failing(*args):
        calls[0] += 1
        if calls[0] == 3:
            raise MemoryError("simulated")
        return real(*args)

    monkeypatch.setattr(eigen, "_panel_moves", failing)
    with pytest.raises(MemoryError):
        eigen.PanelMatrix(A, 8 * 64, 300)
    assert calls[0] > 3                                            # the two ranges were put back
    assert np.array_equal(A.data, data0) and np.array_equal(A.indices, indices0)
    monkeypatch.setattr(eigen, "PANEL_MIN_ROWS", 0)
    A.data.flags.writeable = False
    assert not eigen.panels_apply(A, A.shape[0])


def test_products_into_buffers_are_the_allocating_products_bit_for_bit():
    # the ARPACK loop multiplies into two reused vectors (SymmetricOperator.apply_into); every form
    # of operator must give the bits of SymmetricOperator.apply (itself checked against networkx)
    from concurrent.futures import ThreadPoolExecutor

    A, _ = planted_partition(3000, 4, 24.0, 2.0, seed=9)
    A = sp.csr_array(A, dtype=np.float64)
    n = A.shape[0]
    rng = np.random.default_rng(4)
    x = rng.uniform(-1.0, 1.0, n)
    d = np.asarray(A.sum(axis=1)).ravel()
    s = 1.0 / np.sqrt(d)
    forms = {
        "scaled rows + identity": dict(S=A, diagonal=1.0, row_scale=s),
        "diagonal array + scale": dict(S=A, diagonal=rng.uniform(-2, 2, n), scale=0.7),
        "rank one (modularity)": dict(S=A, diagonal=-d, rank_one=d, rank_one_denominator=float(d.sum())),
        "no diagonal": dict(S=A, diagonal=0.0),
    }
    with ThreadPoolExecutor(max_workers=1) as pool:
        for name, kw in forms.items():
            plain = eigen.SymmetricOperator(**kw)
            variants = [plain, plain.parallel(pool, 2),
                        plain.with_sparse(eigen._BoundPanels(eigen.PanelMatrix(A.copy(), 8 * 700, 256), pool, 2))]
            want = plain.apply(x)
            for op in variants:
                out, scratch = np.full(n, np.nan), np.full(n, np.nan)
                got = op.apply_into(x, out, scratch)
                assert got is out and np.array_equal(got, want), name
                assert np.array_equal(op.apply_into(x, out, scratch), want), name     # buffers reused


def _grid(side: int, seed: int | None = None) -> sp.csr_array:
    """A side x side 2-D grid (networkx.grid_2d_graph), in row-major order or, with ``seed``, with
    its nodes in a seeded random order."""
    import networkx as nx

    n = side * side
    nodes = list(range(n)) if seed is None else list(np.random.default_rng(seed).permutation(n))
    G = nx.convert_node_labels_to_integers(nx.grid_2d_graph(side, side))
    A = sp.csr_array(nx.to_scipy_sparse_array(G, nodelist=nodes, format="csr"), dtype=np.float64)
    A.sort_indices()
    return A


def test_median_span_of_random_ends_and_of_a_grid():
    from workspace.spectral.ordering import median_span

    # uniform random ends: median |U - V| = (1 - 1/sqrt 2) n for independent uniform U, V
    # (closed form: P(|U - V| <= t n) = 1 - (1 - t)**2)
    A = _random_symmetric(20000, 0.002, seed=11)
    assert abs(median_span(A) / 20000 - (1 - 2 ** -0.5)) < 0.01
    # a grid in row-major order: half the entries span 1, half the side
    assert median_span(_grid(60)) <= 60
    assert median_span(_grid(60, seed=1)) > 3600 / 8
    assert median_span(sp.csr_array((5, 5))) == 0.0


def test_a_node_order_with_locality_is_not_panelled(monkeypatch):
    """Panels help only where the vector is read at random places. A graph stored in an order with
    locality (here a grid in row-major order, whose breadth-first computation order the engine
    declines as no shorter) keeps row blocks: measured 2.4x slower in panels at 10M nodes."""
    from workspace.spectral import ordering

    monkeypatch.setattr(eigen, "PANEL_MIN_ROWS", 0)
    assert eigen.panels_apply(_grid(80, seed=12), 6400)       # random order: panelled
    A = _grid(150)
    assert not eigen.panels_apply(A, A.shape[0])               # row-major: not
    built = []
    real = eigen.PanelMatrix.__init__
    monkeypatch.setattr(eigen.PanelMatrix, "__init__", lambda self, *a, **kw: (built.append(1), real(self, *a, **kw))[1])
    monkeypatch.setattr(ordering, "ORDER_MIN_NODES", 0)
    monkeypatch.setattr(eigen, "SCALED_PRODUCT_MIN_NODES", 0)
    res = partition(A, "njw", k=4, seed=0)
    assert not built
    monkeypatch.setattr(eigen, "PANEL_MIN_SPAN", 0.0)        # forced: the same labels and bits
    forced = partition(A, "njw", k=4, seed=0)
    assert built
    assert np.array_equal(res.labels, forced.labels)
    assert res.eigenvalues.tobytes() == forced.eigenvalues.tobytes()
