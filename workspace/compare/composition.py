"""Composition of communities by a categorical node attribute, and their agreement."""

from __future__ import annotations

from typing import Any, Sequence

import numpy as np

from workspace.compare.scores import adjusted_rand_index, normalized_mutual_info
from workspace.errors import ParameterError


def composition(labels: np.ndarray, values: Sequence[Any], *, nmi_normalization: str = "arithmetic"
                ) -> dict[str, Any]:
    """Each community's make-up by an attribute, and how well communities follow it.

    With ``n_cv = #{i : label_i = c, value_i = v}`` (nodes with a community
    and a value), community ``c`` has counts ``n_cv``, shares
    ``n_cv / Σ_v n_cv`` and dominant value ``argmax_v n_cv`` (first in
    category order on ties); purity ``Σ_c max_v n_cv / N``. Agreement between
    the partition and the attribute (read as a partition) is the adjusted Rand
    index and the normalised mutual information, computed as the diff
    computes them, over the same ``N`` nodes.

    Parameters
    ----------
    labels : ndarray of int, shape (n,)
        Community per node; -1 (none) is left out.
    values : sequence, length n
        Attribute value per node (None: no value, left out). Categories are the
        distinct values, sorted (numbers numerically, else as text).
    nmi_normalization : {"arithmetic", "geometric", "max", "min"}

    Returns
    -------
    dict
        ``categories`` (list), ``nodes`` (N), ``left_out`` (n − N),
        ``communities`` (list of ``community``, ``size``, ``counts`` (per
        category), ``shares``, ``dominant``, ``dominant_share``), ``purity``,
        ``ari``, ``nmi``, ``nmi_normalization``.

    References
    ----------
    L. Hubert and P. Arabie, "Comparing partitions", Journal of Classification 2
    (1985) (ARI); A. Strehl and J. Ghosh, "Cluster ensembles", JMLR 3 (2002)
    (NMI, purity).
    """
    labels = np.asarray(labels, dtype=np.int64)
    if labels.ndim != 1 or labels.shape[0] != len(values):
        raise ParameterError("labels and values must have the same length")
    keep = np.array([lab >= 0 and v is not None for lab, v in zip(labels.tolist(), values)], dtype=bool)
    kept_values = [v for v, k in zip(values, keep.tolist()) if k]
    try:
        categories = sorted(set(kept_values))
    except TypeError:
        categories = sorted(set(kept_values), key=str)
    if not categories:
        raise ParameterError("no node has both a community and a value of this attribute")
    code_of = {v: j for j, v in enumerate(categories)}
    codes = np.array([code_of[v] for v in kept_values], dtype=np.int64)
    comm = labels[keep]
    k = int(comm.max()) + 1
    m = len(categories)
    counts = np.bincount(comm * m + codes, minlength=k * m).reshape(k, m)
    n = int(codes.size)
    rows = []
    for c in range(k):
        size = int(counts[c].sum())
        if size == 0:
            continue
        d = int(np.argmax(counts[c]))
        rows.append({"community": c, "size": size, "counts": counts[c].tolist(),
                     "shares": (counts[c] / size).tolist(), "dominant": categories[d],
                     "dominant_share": float(counts[c, d] / size)})
    return {"categories": categories, "nodes": n, "left_out": int(labels.size - n), "communities": rows,
            "purity": float(counts.max(axis=1).sum() / n),
            "ari": float(adjusted_rand_index(comm, codes)),
            "nmi": float(normalized_mutual_info(comm, codes, normalization=nmi_normalization)),
            "nmi_normalization": nmi_normalization}
