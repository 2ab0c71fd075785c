"""``SymmetricOperator.apply_into`` (the eigensolver's products into reused vectors).

It must give the bits of ``apply`` (so a run's eigenvectors and labels do not change) for every
kind of operator, and the value of the operator's definition, checked against a product built
with scipy (``scipy.sparse.diags`` and ``csr_array @``; common practice for the scaled adjacency
``D^-1/2 A D^-1/2``).
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest
import scipy.sparse as sp

from workspace.spectral.eigen import PanelMatrix, RowBlockMatrix, SymmetricOperator, _BoundPanels


def _graph(n: int = 400, seed: int = 5) -> sp.csr_array:
    rng = np.random.default_rng(seed)
    rows = rng.integers(0, n, 6 * n)
    cols = rng.integers(0, n, 6 * n)
    A = sp.coo_array((rng.uniform(0.5, 2.0, rows.size), (rows, cols)), shape=(n, n)).tocsr()
    A = (A + A.T).tocsr()
    A.sort_indices()
    return sp.csr_array(A)


def _kinds(A: sp.csr_array):
    n = A.shape[0]
    rng = np.random.default_rng(1)
    s = rng.uniform(0.2, 1.0, n)
    c = rng.uniform(-1.0, 1.0, n)
    u = rng.uniform(-1.0, 1.0, n)
    yield "plain", dict()
    yield "scaled rows", dict(row_scale=s)
    yield "scale and scalar diagonal", dict(scale=0.7, diagonal=1.5)
    yield "vector diagonal", dict(diagonal=c)
    yield "rank one", dict(rank_one=u, rank_one_denominator=3.0, diagonal=c, row_scale=s)


def _reference(A: sp.csr_array, kw: dict, x: np.ndarray) -> np.ndarray:
    n = A.shape[0]
    S = A
    if "row_scale" in kw:
        D = sp.diags_array(kw["row_scale"])
        S = D @ A @ D
    y = kw.get("scale", 1.0) * (S @ x)
    diag = kw.get("diagonal", 0.0)
    y = y + (sp.diags_array(np.broadcast_to(diag, (n,))) @ x)
    if "rank_one" in kw:
        u = kw["rank_one"]
        y = y - u * (u @ x) / kw["rank_one_denominator"]
    return y


@pytest.mark.parametrize("sparse_part", ["csr", "row blocks", "panels"])
def test_apply_into_gives_the_bits_of_apply(monkeypatch, sparse_part):
    A = _graph()
    n = A.shape[0]
    x = np.random.default_rng(2).uniform(-1.0, 1.0, n)
    with ThreadPoolExecutor(1) as executor:
        if sparse_part == "row blocks":
            S = RowBlockMatrix(A, executor, 2)
        elif sparse_part == "panels":
            import workspace.spectral.eigen as eigen

            monkeypatch.setattr(eigen, "PANEL_BYTES", 8 * 64)  # several panels on a small matrix
            monkeypatch.setattr(eigen, "PANEL_RANGE_ROWS", 50)
            S = _BoundPanels(PanelMatrix(A.copy()), executor, 2)
        else:
            S = A
        for name, kw in _kinds(A):
            op = SymmetricOperator(S, **kw)
            out, scratch = np.full(n, np.nan), np.full(n, np.nan)
            got = op.apply_into(x, out, scratch)
            assert got is out
            assert got.tobytes() == op.apply(x).tobytes(), name
            np.testing.assert_allclose(got, _reference(A, kw, x), rtol=1e-12, atol=1e-12, err_msg=name)
            again = op.apply_into(x, out, scratch)  # the buffers reused: the same result
            assert again.tobytes() == op.apply(x).tobytes(), name


def test_an_operator_with_its_own_apply_keeps_it():
    A = _graph(100)

    class Doubled(SymmetricOperator):
        def apply(self, X):
            return 2.0 * super().apply(X)

    op = Doubled(A, diagonal=0.5)
    x = np.linspace(-1.0, 1.0, 100)
    got = op.apply_into(x, np.empty(100), np.empty(100))
    assert got.tobytes() == op.apply(x).tobytes()
    np.testing.assert_allclose(got, 2.0 * (A @ x + 0.5 * x), rtol=1e-12)
