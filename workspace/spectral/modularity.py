"""Newman's leading-eigenvector method (recursive modularity bisection)."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .eigen import SolverContext, SymmetricOperator, largest_eigenpairs
from .laplacians import degrees

__all__ = ["leading_eigenvector", "refine_split"]


def refine_split(Ag, dg: np.ndarray, two_m: float, s: np.ndarray, ctx: SolverContext | None = None,
                 max_sweeps: int = 50) -> tuple[np.ndarray, int]:
    r"""Vertex-moving fine-tuning of one split (Newman 2006, Kernighan–Lin style).

    With the generalised modularity matrix :math:`B^{(g)}` of the group and the
    split vector :math:`s \in \{\pm1\}^{n_g}`, moving vertex :math:`i` to the
    other side changes :math:`s^T B^{(g)} s` by
    :math:`\delta_i = -4 s_i \big((B^{(g)} s)_i - B^{(g)}_{ii} s_i\big)`.
    One sweep moves every vertex exactly once, each time the not-yet-moved
    vertex with the largest :math:`\delta_i` (even when it is negative), and
    keeps the best of the intermediate states; sweeps repeat while the best
    state raises :math:`s^T B^{(g)} s` by more than :math:`10^{-12}\,(4m)`,
    at most ``max_sweeps`` times.

    Parameters
    ----------
    Ag : scipy sparse matrix, shape (n_g, n_g)
        Adjacency of the group (induced subgraph).
    dg : ndarray, shape (n_g,)
        Degrees of the group's vertices in the whole graph.
    two_m : float
        :math:`2m` of the whole graph.
    s : ndarray of ±1, shape (n_g,)
        The split to refine (not modified).
    ctx : SolverContext, optional
        Polled for cancellation once per move.
    max_sweeps : int, default 50

    Returns
    -------
    s : ndarray of ±1, shape (n_g,)
        The refined split (never worse than the input).
    sweeps : int
        Sweeps that improved the split.

    Notes
    -----
    :math:`B^{(g)} s` is kept up to date in O(n_g + deg(i)) per move
    (a sparse column and a rank-one term), so a sweep costs O(n_g^2) in
    vectorised steps; the caller bounds the group size.

    References
    ----------
    Newman (2006), Modularity and community structure in networks, PNAS
    103(23), 8577–8582 (the fine-tuning step); Kernighan & Lin (1970), An
    efficient heuristic procedure for partitioning graphs, Bell System
    Technical Journal 49(2).
    """
    Ag = sp.csc_array(Ag)
    s = np.array(s, dtype=np.float64)
    n = s.shape[0]
    row_in = np.asarray(Ag.sum(axis=0)).ravel()        # symmetric: column sums = row sums
    diag_shift = -(row_in - dg * dg.sum() / two_m)
    B_diag = Ag.diagonal() - dg * dg / two_m + diag_shift
    indptr, indices, data = Ag.indptr, Ag.indices, Ag.data
    # delta_j = base_j + w_j * sigma with sigma = d.t: the rank-one part of B t is -d sigma / 2m,
    # so a move changes sigma (one number) and base only at the mover's neighbours
    improved = 0
    tol = 1e-12 * 2.0 * two_m
    for _ in range(max_sweeps):
        t = s.copy()
        As = Ag @ t + diag_shift * t
        base = -4.0 * t * As + 4.0 * B_diag
        w = 4.0 * t * dg / two_m
        sigma = float(dg @ t)
        total = 0.0
        best_total, best_step = 0.0, -1
        order_moves = np.empty(n, dtype=np.int64)
        for step in range(n):
            if ctx is not None and step % 256 == 0:
                ctx.check_cancel()
            key = w * sigma
            key += base
            i = int(np.argmax(key))
            total += float(key[i])
            order_moves[step] = i
            ti = t[i]
            lo, hi = indptr[i], indptr[i + 1]
            nb = indices[lo:hi]
            base[nb] += 8.0 * ti * t[nb] * data[lo:hi]
            sigma -= 2.0 * ti * dg[i]
            t[i] = -ti
            base[i] = -np.inf                          # moved: never chosen again this sweep
            w[i] = 0.0
            if total > best_total + tol:
                best_total, best_step = total, step
        if best_step < 0:
            break
        flip = order_moves[:best_step + 1]
        s[flip] = -s[flip]
        improved += 1
    return s, improved


def leading_eigenvector(A, ctx: SolverContext, *, two_m: float | None = None,
                        min_gain: float = 1e-10, refine: bool = True,
                        refine_max_size: int = 5000) -> tuple[np.ndarray, np.ndarray, dict]:
    r"""Divide a graph by the leading eigenvectors of the modularity matrix.

    For a group :math:`g` the generalised modularity matrix is
    :math:`B^{(g)}_{ij} = A_{ij} - \frac{d_i d_j}{2m} - \delta_{ij}\sum_{l \in g}\big(A_{il} - \frac{d_i d_l}{2m}\big)`
    (:math:`i, j \in g`; for the whole graph :math:`B = A - dd^T/2m`).
    Split :math:`g` by the signs :math:`s` of the leading eigenvector of
    :math:`B^{(g)}`; with ``refine`` fine-tune :math:`s` by vertex moves
    (:func:`refine_split`); keep the split only if the modularity gain
    :math:`\Delta Q = s^T B^{(g)} s / 4m` exceeds ``min_gain``; repeat on
    both halves.

    Stopping rule: a group is **indivisible** and becomes a final community
    when (a) the leading eigenvalue of :math:`B^{(g)}` is not positive
    (:math:`\le 10^{-12}`; no division raises modularity, e.g. a complete
    graph), (b) the eigenvector has one sign, or (c) the best split found
    (after refinement) gives :math:`\Delta Q \le` ``min_gain``, or leaves
    one side empty. Division ends when every group is indivisible.

    Parameters
    ----------
    A : scipy sparse matrix, shape (n, n)
        Symmetric adjacency with an undirected self-loop of weight w held
        as :math:`A_{ii} = 2w` (the convention of the modularity formula).
    ctx : SolverContext
    two_m : float, optional
        :math:`2m` of the whole graph the modularity refers to (defaults
        to the sum of degrees of ``A``).
    min_gain : float, default 1e-10
        The tolerance of the stopping rule on :math:`\Delta Q`.
    refine : bool, default True
        Fine-tune every split by vertex moves (Newman 2006).
    refine_max_size : int, default 5000
        Groups larger than this are split without refinement (a sweep is
        O(n_g^2)); ``info["unrefined_groups"]`` counts them.

    Returns
    -------
    labels : ndarray of int64, shape (n,)
    eigenvalues : ndarray
        Leading eigenvalue of every :math:`B^{(g)}` examined, in order.
    info : dict
        ``splits`` accepted, ``gains`` (list of ΔQ), ``refined_sweeps``,
        ``unrefined_groups``.

    Notes
    -----
    The operator is applied matrix-free (sparse part plus a rank-one
    term), so no dense ``n × n`` matrix is formed above the dense
    threshold. Zero entries of the eigenvector go to the "+" side.
    Without refinement the karate club gives Q = 0.3934; with it, the
    published Q ≈ 0.419 with 4 communities (Newman 2006, Table 1).

    References
    ----------
    Newman (2006), Modularity and community structure in networks, PNAS
    103(23), 8577–8582.
    """
    A = sp.csr_array(A)
    n = A.shape[0]
    d = degrees(A)
    two_m = float(d.sum()) if two_m is None else float(two_m)
    labels = np.zeros(n, dtype=np.int64)
    stack = [np.arange(n)]
    next_label = 1
    betas: list[float] = []
    gains: list[float] = []
    sweeps = 0
    unrefined = 0
    while stack:
        ctx.check_cancel()
        g = stack.pop()
        if g.shape[0] < 2:
            continue
        Ag = A[g][:, g]
        dg = d[g]
        row_in = degrees(Ag)
        diag = -(row_in - dg * dg.sum() / two_m)
        op = SymmetricOperator(Ag, diagonal=diag, rank_one=dg, rank_one_denominator=two_m)
        sol = largest_eigenpairs(op, 1, ctx, stage="leading-eigenvector",
                                 bound=float(2 * dg.max() + 1.0))
        beta = float(sol.values[0])
        betas.append(beta)
        if beta <= 1e-12:
            continue
        s = np.where(sol.vectors[:, 0] >= 0, 1.0, -1.0)
        if np.all(s == s[0]):
            continue
        if refine:
            if g.shape[0] <= refine_max_size:
                s, used = refine_split(Ag, dg, two_m, s, ctx)
                sweeps += used
            else:
                unrefined += 1
        if np.all(s == s[0]):
            continue
        gain = float(s @ op.apply(s)) / (2.0 * two_m)
        if gain <= min_gain:
            continue
        gains.append(gain)
        minus = g[s < 0]
        labels[minus] = next_label
        next_label += 1
        stack.append(g[s > 0])
        stack.append(minus)
    if unrefined:
        ctx.warnings.append(f"leading-eigenvector: {unrefined} group(s) above refine_max_size="
                            f"{refine_max_size} nodes were split without vertex-moving refinement")
    return labels, np.array(betas, dtype=np.float64), {
        "splits": len(gains), "gains": gains, "refined_sweeps": sweeps, "unrefined_groups": unrefined}
