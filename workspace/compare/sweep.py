"""Reading a sweep over k: stability among repeats, how communities split, which k to take and why.

- :func:`stability` — mean and spread of the pairwise adjusted Rand index and
  of the variation of information among repeated partitions (seeds and/or
  perturbed weights) of the same nodes;
- :func:`split_view` — from the contingency table of the partitions at two
  consecutive k, which community of the smaller k each community of the larger
  k comes from (a hierarchy view);
- :func:`recommend_k` — candidates ranked by eigengap, stability plateau and
  quality, each with its reasons stated.

References
----------
Ben-Hur, Elisseeff & Guyon (2002), A stability based method for discovering
structure in clustered data, Pacific Symposium on Biocomputing 7; von Luxburg
(2010), Clustering stability: an overview, Foundations and Trends in Machine
Learning 2(3); Lambiotte, Delvenne & Barahona (2014), Random walks, Markov
processes and the multiscale modular organization of complex networks, IEEE
Trans. Network Science and Engineering 1(2) (the spread of VI among repeated
optimisations as a robustness measure); Meilă (2007) for VI; Hubert & Arabie
(1985) for ARI; von Luxburg (2007), Sec. 8.3, for the eigengap.
"""

from __future__ import annotations

import itertools
import math
from typing import Any, Sequence

import numpy as np

from workspace.errors import ComputeError

from .contingency import contingency_table
from .scores import _adjusted_rand_index, _variation_of_information

__all__ = ["stability", "split_view", "recommend_k", "STABLE_ARI"]

#: Mean pairwise ARI from which a k counts as stable.
STABLE_ARI = 0.95


def stability(label_runs: Sequence[np.ndarray]) -> dict[str, Any]:
    r"""Agreement among repeated partitions of the same nodes.

    For ``R`` partitions, over all :math:`\binom{R}{2}` pairs:
    ``ari_mean``/``ari_sd`` are the mean and (population) standard deviation
    of the adjusted Rand index, ``vi_mean``/``vi_sd`` those of the variation of
    information in nats, :math:`VI = H(U|V) + H(V|U)` (Meilă 2007);
    ``vi_normalized_mean`` divides VI by :math:`\ln n`, its upper bound.

    Parameters
    ----------
    label_runs : sequence of int arrays, shape (n,) each

    Returns
    -------
    dict
        ``repeats``, ``pairs``, ``ari_mean``, ``ari_sd``, ``ari_min``,
        ``vi_mean``, ``vi_sd``, ``vi_max``, ``vi_normalized_mean``; the
        statistics are None with fewer than two repeats.

    Raises
    ------
    workspace.errors.ComputeError
        Partitions of different lengths or of zero nodes.

    References
    ----------
    Ben-Hur, Elisseeff & Guyon (2002); von Luxburg (2010); Lambiotte,
    Delvenne & Barahona (2014); Hubert & Arabie (1985); Meilă (2007).
    """
    runs = [np.asarray(r, dtype=np.int64) for r in label_runs]
    out: dict[str, Any] = {"repeats": len(runs), "pairs": 0, "ari_mean": None, "ari_sd": None, "ari_min": None,
                           "vi_mean": None, "vi_sd": None, "vi_max": None, "vi_normalized_mean": None}
    if len(runs) < 2:
        return out
    n = runs[0].shape[0]
    if n == 0 or any(r.shape[0] != n for r in runs):
        raise ComputeError("repeated partitions must label the same, non-empty set of nodes")
    aris, vis = [], []
    for a, b in itertools.combinations(runs, 2):
        t = contingency_table(a, b)
        aris.append(_adjusted_rand_index(t))
        vis.append(_variation_of_information(t)[0])
    aris_a, vis_a = np.array(aris), np.array(vis)
    out.update(pairs=len(aris), ari_mean=float(aris_a.mean()), ari_sd=float(aris_a.std()),
               ari_min=float(aris_a.min()), vi_mean=float(vis_a.mean()), vi_sd=float(vis_a.std()),
               vi_max=float(vis_a.max()),
               vi_normalized_mean=float(vis_a.mean() / math.log(n)) if n > 1 else 0.0)
    return out


def split_view(labels_small: np.ndarray, labels_large: np.ndarray) -> list[dict[str, Any]]:
    r"""Which community of the coarser partition each community of the finer one comes from.

    With the contingency table :math:`n_{pq}` of the partition at the smaller k
    (rows p) and at the next k (columns q), community q's parent is
    :math:`\arg\max_p n_{pq}` and its purity :math:`\max_p n_{pq} / b_q`.
    One row per coarse community p, listing its children (the q whose
    parent is p) with their sizes, the nodes they take from p and their
    purity; ``kept`` marks a p with one child that holds at least 90 % of p
    and is at least 90 % p (unchanged), ``split`` a p with two or more
    children.

    Parameters
    ----------
    labels_small, labels_large : int arrays, shape (n,)
        Memberships of the same nodes at the smaller and the larger k.

    Returns
    -------
    list of dict
        ``community, size, children: [{community, size, from_parent, purity}],
        kind ("kept" | "split" | "merged-away" | "reshaped")``, ordered by p.
        ``merged-away``: no finer community has p as its parent.

    References
    ----------
    Hubert & Arabie (1985) for the contingency table; the parent rule is the
    maximum-overlap link used by community-tracking methods (common practice).
    """
    t = contingency_table(labels_small, labels_large)
    r, c = t.rows.shape[0], t.cols.shape[0]
    dense = np.zeros((r, c), dtype=np.int64)
    dense[t.cell_row, t.cell_col] = t.cell_count
    parent = dense.argmax(axis=0)
    rows = []
    for p in range(r):
        kids = np.flatnonzero(parent == p)
        children = [{"community": int(t.cols[q]), "size": int(t.col_sizes[q]), "from_parent": int(dense[p, q]),
                     "purity": float(dense[p, q] / t.col_sizes[q])} for q in kids]
        children.sort(key=lambda ch: -ch["from_parent"])
        if not kids.size:
            kind = "merged-away"
        elif kids.size >= 2:
            kind = "split"
        else:
            q = kids[0]
            kind = "kept" if dense[p, q] >= 0.9 * t.row_sizes[p] and dense[p, q] >= 0.9 * t.col_sizes[q] \
                else "reshaped"
        rows.append({"community": int(t.rows[p]), "size": int(t.row_sizes[p]), "children": children, "kind": kind})
    return rows


def recommend_k(points: Sequence[dict[str, Any]], *, stable_ari: float = STABLE_ARI) -> dict[str, Any]:
    r"""Rank the k of a sweep by eigengap, stability plateau and quality, stating each reason.

    Rules (each shown in the reasons):

    1. **Stability** (Ben-Hur et al. 2002; von Luxburg 2010): a k is stable
       when the mean pairwise ARI among its repeats is at least
       ``stable_ari``. When any k was repeated, only stable k are candidates;
       if none is stable, nothing is recommended. A stable k whose
       neighbours in the range are stable too sits on a plateau.
    2. **Eigengap** (von Luxburg 2007, Sec. 8.3): candidates are ordered by
       :math:`g_k = \lambda_{k+1} - \lambda_k`, largest first. Because every k
       of a sweep is at least 2, the trivial first gap :math:`\lambda_2 -
       \lambda_1` (which makes "k = 1" win on clear partitions) never competes.
    3. **Quality**: ties (and points without an eigengap) are ordered by
       modularity (Newman & Girvan 2004).

    Parameters
    ----------
    points : sequence of dict
        One per k: ``k`` (int), ``eigengap`` (float or None),
        ``ari_mean`` / ``ari_sd`` / ``vi_mean`` / ``repeats`` (from
        :func:`stability`; ``ari_mean`` None when not repeated),
        ``modularity`` (float or None), optional ``negative_eigenvalues``
        (Bethe Hessian count).
    stable_ari : float, default 0.95

    Returns
    -------
    dict
        ``recommended`` (int or None), ``candidates`` (list of ``{k, rank,
        reasons}`` best first), ``stable`` (list of k), ``stability_measured``
        (bool), ``notes`` (list of str).
    """
    pts = sorted((dict(p) for p in points), key=lambda p: int(p["k"]))
    if not pts:
        return {"recommended": None, "candidates": [], "stable": [], "stability_measured": False,
                "notes": ["the sweep has no finished k"]}
    by_k = {int(p["k"]): p for p in pts}
    ks = [int(p["k"]) for p in pts]
    measured = any(p.get("ari_mean") is not None for p in pts)
    stable = [k for k in ks if by_k[k].get("ari_mean") is not None and by_k[k]["ari_mean"] >= stable_ari]
    gaps = {k: by_k[k].get("eigengap") for k in ks}
    gap_order = sorted((k for k in ks if gaps[k] is not None), key=lambda k: -gaps[k])
    gap_rank = {k: i + 1 for i, k in enumerate(gap_order)}
    mods = {k: by_k[k].get("modularity") for k in ks}
    notes: list[str] = []
    if measured:
        pool = stable
        if not stable:
            best = max((k for k in ks if by_k[k].get("ari_mean") is not None), key=lambda k: by_k[k]["ari_mean"])
            notes.append(f"no k is stable: none reached mean ARI >= {stable_ari:g} among its repeats "
                         f"(highest: k={best}, {by_k[best]['ari_mean']:.3f}); this range shows no grouping "
                         "that survives reseeding and perturbation")
    else:
        pool = list(ks)
        notes.append("stability was not measured (one repeat per k); run the sweep with --seeds 2 or more "
                     "(and --perturb) before trusting a k")

    def order_key(k):
        g = gaps[k]
        m = mods[k]
        return (0 if g is not None else 1, -(g if g is not None else 0.0),
                -(by_k[k].get("ari_mean") or 0.0), -(m if m is not None else -1.0), k)

    candidates = []
    for rank, k in enumerate(sorted(pool, key=order_key), start=1):
        p = by_k[k]
        reasons = []
        g = gaps[k]
        if g is not None:
            nxt = [gaps[j] for j in gap_order if j != k]
            where = ("the largest" if gap_rank[k] == 1 else f"rank {gap_rank[k]} of {len(gap_order)}")
            reasons.append(f"eigengap lambda_{k + 1} - lambda_{k} = {g:.4g}, {where} in the range"
                           + (f" (next largest {max(nxt):.4g})" if gap_rank[k] == 1 and nxt else ""))
        else:
            reasons.append("eigengap not available (not computed, or meaningless for this method or graph)")
        if p.get("negative_eigenvalues") is not None and p["negative_eigenvalues"] == k:
            reasons.append(f"the Bethe Hessian has exactly {k} negative eigenvalues")
        if p.get("ari_mean") is not None:
            reasons.append(f"stable over {p.get('repeats')} repeats: mean ARI {p['ari_mean']:.3f} "
                           f"(sd {p.get('ari_sd') or 0.0:.3f}), mean VI {p.get('vi_mean') or 0.0:.3g} nats "
                           f"(sd {p.get('vi_sd') or 0.0:.3g})")
            run = _plateau(k, ks, stable)
            if len(run) > 1:
                reasons.append(f"on a stability plateau k={run[0]}..{run[-1]}")
            for j in (k - 1, k + 1):
                q = by_k.get(j)
                if q is not None and q.get("ari_mean") is not None and \
                        (q["ari_mean"] < stable_ari or q["ari_mean"] < p["ari_mean"] - 0.02):
                    reasons.append(f"k={j} is less stable (mean ARI {q['ari_mean']:.3f}, "
                                   f"mean VI {q.get('vi_mean') or 0.0:.3g} nats)")
        m = mods[k]
        if m is not None:
            pool_mods = [mods[j] for j in pool if mods[j] is not None]
            best_m = max(pool_mods) if pool_mods else m
            reasons.append(f"modularity {m:.4f}" + (" (highest among the candidates)" if m >= best_m
                                                     else f" (candidates' highest {best_m:.4f})"))
        candidates.append({"k": k, "rank": rank, "reasons": reasons})
    recommended = candidates[0]["k"] if candidates else None
    return {"recommended": recommended, "candidates": candidates, "stable": stable,
            "stability_measured": measured, "notes": notes}


def _plateau(k: int, ks: list[int], stable: list[int]) -> list[int]:
    """The run of consecutive swept k around ``k`` that are all stable."""
    s = set(stable)
    i = ks.index(k)
    lo = hi = i
    while lo > 0 and ks[lo - 1] in s:
        lo -= 1
    while hi + 1 < len(ks) and ks[hi + 1] in s:
        hi += 1
    return ks[lo:hi + 1]
