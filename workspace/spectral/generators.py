"""Seeded samplers of random graphs with a planted community structure.

Used by the tests, the benchmarks and the demo. Pure numpy/scipy; no global
random state (every call takes an explicit ``seed``).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from workspace.errors import ParameterError

__all__ = ["planted_partition"]


def _block_sizes(n: int, k: int) -> np.ndarray:
    """Sizes of ``k`` blocks that split ``n`` nodes as evenly as possible.

    The first ``n mod k`` blocks get one node more. Returns int64, shape (k,).
    """
    base, extra = divmod(int(n), int(k))
    sizes = np.full(k, base, dtype=np.int64)
    sizes[:extra] += 1
    return sizes


def _sorted_unique(x: np.ndarray) -> np.ndarray:
    """Sorted distinct values of ``x`` (sort + neighbour comparison; in place)."""
    x.sort()
    if x.shape[0] < 2:
        return x
    keep = np.empty(x.shape[0], dtype=bool)
    keep[0] = True
    np.not_equal(x[1:], x[:-1], out=keep[1:])
    return x[keep]


def _distinct_uniform(rng: np.random.Generator, total: int, count: int,
                      accept=None) -> np.ndarray:
    """``count`` distinct integers drawn uniformly from ``[0, total)``.

    Draws with replacement, removes duplicates and tops up until ``count``
    distinct values remain; O(count log count). ``accept`` optionally filters
    candidates (rejection sampling on a sub-range).
    """
    if count == 0:
        return np.empty(0, dtype=np.int64)
    chosen = np.empty(0, dtype=np.int64)
    while chosen.shape[0] < count:
        need = count - chosen.shape[0]
        draw = rng.integers(0, total, size=int(need * 1.05) + 16, dtype=np.int64)
        if accept is not None:
            draw = draw[accept(draw)]
        chosen = _sorted_unique(np.concatenate([chosen, draw]))
    if chosen.shape[0] > count:
        # drop a uniformly random surplus so the kept set stays uniform
        keep = rng.choice(chosen.shape[0], size=count, replace=False)
        chosen = chosen[np.sort(keep)]
    return chosen


def planted_partition(n: int, k: int, c_in: float, c_out: float, seed: int = 0, *,
                      shuffle: bool = True) -> tuple[sp.csr_array, np.ndarray]:
    r"""Sample a sparse stochastic block model with ``k`` equal blocks.

    Each pair of distinct nodes ``i < j`` is joined independently with
    probability

    .. math:: P(A_{ij}=1) = c_{in}/n \text{ if } g_i = g_j, \quad c_{out}/n \text{ otherwise},

    so the expected mean degree is :math:`c = (c_{in} + (k-1) c_{out})/k`.
    For equal blocks the planted groups are detectable by any method only
    if :math:`|c_{in} - c_{out}| > k\sqrt{c}`, which for ``k = 2`` reads
    :math:`(c_{in}-c_{out})^2 > 2(c_{in}+c_{out})` (Decelle et al. 2011).

    Parameters
    ----------
    n : int
        Number of nodes, ``n >= k``.
    k : int
        Number of blocks, ``k >= 1``; sizes differ by at most one.
    c_in, c_out : float
        Expected number of neighbours a node has inside its own block, and
        in each other block, scaled as above (``0 <= c <= n``).
    seed : int, default 0
        Seed of ``numpy.random.default_rng``; same seed, same graph.
    shuffle : bool, default True
        Randomly permute node indices so blocks are not contiguous.

    Returns
    -------
    A : scipy.sparse.csr_array, shape (n, n)
        Symmetric 0/1 float64 adjacency, no self-loops, sorted indices
        (int32 when they fit).
    truth : ndarray of int64, shape (n,)
        Planted block of each node, ``0..k-1``.

    Raises
    ------
    workspace.errors.ParameterError
        If ``n < k``, ``k < 1`` or a probability falls outside [0, 1].

    Notes
    -----
    O(n + m) expected time and memory: for every block pair the number of
    edges is drawn from its binomial law, then that many distinct pairs are
    drawn uniformly (exact G(n, p) per block pair).

    References
    ----------
    Holland, Laskey & Leinhardt (1983), Stochastic blockmodels: first steps.
    Decelle, Krzakala, Moore & Zdeborová (2011), Asymptotic analysis of the
    stochastic block model for modular networks, Phys. Rev. E 84, 066106.
    """
    n = int(n)
    k = int(k)
    if k < 1 or n < k:
        raise ParameterError(f"planted_partition needs 1 <= k <= n (got n={n}, k={k})")
    p_in = float(c_in) / n
    p_out = float(c_out) / n
    for name, p in (("c_in", p_in), ("c_out", p_out)):
        if not 0.0 <= p <= 1.0:
            raise ParameterError(f"planted_partition: {name}/n must lie in [0, 1] (got {p:g})")
    rng = np.random.default_rng(seed)
    sizes = _block_sizes(n, k)
    starts = np.concatenate([[0], np.cumsum(sizes)])
    us: list[np.ndarray] = []
    vs: list[np.ndarray] = []
    for a in range(k):
        na = int(sizes[a])
        # inside block a: unordered pairs i < j
        pairs = na * (na - 1) // 2
        m_ab = int(rng.binomial(pairs, p_in)) if pairs else 0
        if m_ab:
            idx = _distinct_uniform(rng, na * na, m_ab,
                                    accept=lambda x, na=na: (x // na) < (x % na))
            us.append(idx // na + starts[a])
            vs.append(idx % na + starts[a])
        for b in range(a + 1, k):
            nb = int(sizes[b])
            pairs = na * nb
            m_ab = int(rng.binomial(pairs, p_out)) if pairs else 0
            if m_ab:
                idx = _distinct_uniform(rng, pairs, m_ab)
                us.append(idx // nb + starts[a])
                vs.append(idx % nb + starts[b])
    u = np.concatenate(us) if us else np.empty(0, dtype=np.int64)
    v = np.concatenate(vs) if vs else np.empty(0, dtype=np.int64)
    truth = np.repeat(np.arange(k, dtype=np.int64), sizes)
    if shuffle:
        perm = rng.permutation(n)          # old index -> new index
        u = perm[u]
        v = perm[v]
        new_truth = np.empty_like(truth)
        new_truth[perm] = truth
        truth = new_truth
    index_dtype = np.int32 if 2 * u.shape[0] < np.iinfo(np.int32).max and n < np.iinfo(np.int32).max else np.int64
    rows = np.concatenate([u, v]).astype(index_dtype, copy=False)
    cols = np.concatenate([v, u]).astype(index_dtype, copy=False)
    del u, v
    data = np.ones(rows.shape[0], dtype=np.float64)
    # COO -> CSR is a counting sort by row (O(nnz)); pairs are distinct, so
    # there is nothing to sum; then sort the columns inside each row.
    A = sp.coo_array((data, (rows, cols)), shape=(n, n)).tocsr()
    del rows, cols, data
    A.sort_indices()
    return A, truth
