"""Structural difference of two canonical graphs."""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from workspace.domain import GraphData
from workspace.io._common import id_strings


def _pair_keys(graph: GraphData, position: np.ndarray, size: int) -> np.ndarray:
    """Keys ``p(u) * size + p(v)`` of a graph's edges in the union id space."""
    return position[graph.edge_u] * size + position[graph.edge_v]


CHANGE_KINDS = ("nodes_added", "nodes_removed", "edges_added", "edges_removed", "weights_changed")


def no_changes() -> dict:
    """What :func:`structural_changes` returns for two equal graphs: every count 0, every listing
    empty (for callers that know the graphs are equal, e.g. by their content hash, without loading
    them)."""
    return {**{k: 0 for k in CHANGE_KINDS}, "listings": {k: [] for k in CHANGE_KINDS}, "truncated": False}


def structural_changes(old: GraphData, new: GraphData, *, limit: int | None = None) -> dict:
    """Nodes and edges added and removed, and weights changed, from ``old`` to ``new``.

    With ``U = sorted(ids(old) ∪ ids(new))`` and ``p`` the position of an id
    in ``U``, an edge ``{a, b}`` is the int64 key ``p(a) * |U| + p(b)``
    (``p(a) <= p(b)``). Since both graphs are canonical and ``p`` is
    increasing, each graph's keys are already sorted and unique, and

    ``edges_added = K_new \\ K_old``, ``edges_removed = K_old \\ K_new``,
    ``weights_changed = {k in K_old ∩ K_new : w_old(k) != w_new(k)}``

    are found with ``np.searchsorted`` (O(m log m), no Python loop per edge). The ids are
    compared as Arrow strings (``is_in`` and ``index_in``: hash sets; ``U`` sorted by
    ``sort_indices``, UTF-8 byte order, which is code point order); two graphs of the same nodes
    skip all of it. Packed ids (:class:`workspace.domain.PackedNodeIds`) are read as stored and
    only the listed ones become ``str`` (10M 40-character ids as numpy strings were 1.6 GB a
    version, and numpy's string sorts most of a 76 s comparison).

    Parameters
    ----------
    old, new : GraphData
        Canonical graphs (node ids sorted, edges ``u <= v`` sorted); ``node_ids`` a numpy ``str``
        array or :class:`workspace.domain.PackedNodeIds`.
    limit : int or None, default None
        At most this many entries per listing (in canonical order); None
        lists everything. Counts are always complete.

    Returns
    -------
    dict
        ``nodes_added``, ``nodes_removed``, ``edges_added``,
        ``edges_removed``, ``weights_changed`` : int counts;
        ``listings`` : dict with the same five keys - node ids (list of str),
        edges as ``[u_id, v_id]`` (``u_id < v_id`` by code point), weight
        changes as ``[u_id, v_id, old_weight, new_weight]``;
        ``truncated`` : bool, whether any listing was cut by ``limit``.
        Everything is plain Python (JSON-serialisable).

    Notes
    -----
    Weights compare exactly (float64 ``!=``): canonical imports of the same
    file are bit-identical, so any difference is a real change.

    References
    ----------
    C. R. Harris et al., "Array programming with NumPy", Nature 585 (2020):
    sorted-array set operations (``np.searchsorted``); Apache Arrow compute functions ``is_in``,
    ``index_in`` and ``sort_indices``.
    """
    ids_old, ids_new = id_strings(old.node_ids), id_strings(new.node_ids)
    if ids_old.type != ids_new.type:
        ids_old, ids_new = ids_old.cast(pa.large_string()), ids_new.cast(pa.large_string())
    if ids_old.equals(ids_new):
        # the same nodes (weights or edges changed): the union is either list, positions the identity
        union, size = ids_old, len(ids_old)
        pos_old = pos_new = np.arange(size, dtype=np.int64)
        nodes_added = nodes_removed = ids_old.slice(0, 0)
    else:
        nodes_added = ids_new.filter(pc.invert(pc.is_in(ids_new, value_set=ids_old)))
        nodes_removed = ids_old.filter(pc.invert(pc.is_in(ids_old, value_set=ids_new)))
        union = pa.concat_arrays([ids_old, nodes_added])
        union = union.take(pc.sort_indices(union))   # UTF-8 byte order = code point order
        size = len(union)
        pos_old = pc.index_in(ids_old, value_set=union).to_numpy().astype(np.int64)
        pos_new = pc.index_in(ids_new, value_set=union).to_numpy().astype(np.int64)

    key_old = _pair_keys(old, pos_old, size)
    key_new = _pair_keys(new, pos_new, size)
    if key_old.size > 1 and not np.all(key_old[1:] > key_old[:-1]):
        order = np.argsort(key_old, kind="stable")
        key_old, w_old = key_old[order], old.weight[order]
    else:
        w_old = old.weight
    if key_new.size > 1 and not np.all(key_new[1:] > key_new[:-1]):
        order = np.argsort(key_new, kind="stable")
        key_new, w_new = key_new[order], new.weight[order]
    else:
        w_new = new.weight

    at = np.searchsorted(key_old, key_new)
    at_clipped = np.minimum(at, max(key_old.size - 1, 0))
    in_old = (at < key_old.size) & (key_old[at_clipped] == key_new) if key_old.size else \
        np.zeros(key_new.size, dtype=bool)
    added = key_new[~in_old]
    common_new = np.flatnonzero(in_old)
    common_old = at[in_old]
    changed = w_old[common_old] != w_new[common_new]
    changed_keys = key_new[common_new][changed]
    changed_old = w_old[common_old][changed]
    changed_new = w_new[common_new][changed]
    kept_old = np.zeros(key_old.size, dtype=bool)
    kept_old[common_old] = True
    removed = key_old[~kept_old]

    def cut(values):
        return values if limit is None else values[:max(int(limit), 0)]

    def ids_at(positions: np.ndarray) -> list[str]:
        return union.take(pa.array(positions, type=pa.int64())).to_pylist()

    def pairs(keys: np.ndarray) -> list[list[str]]:
        keys = cut(keys)
        return [[a, b] for a, b in zip(ids_at(keys // size), ids_at(keys % size))]

    shown_changed = cut(changed_keys)
    listings = {
        "nodes_added": cut(nodes_added).to_pylist(),
        "nodes_removed": cut(nodes_removed).to_pylist(),
        "edges_added": pairs(added),
        "edges_removed": pairs(removed),
        "weights_changed": [
            [a, b, float(x), float(y)] for a, b, x, y in zip(
                ids_at(shown_changed // size), ids_at(shown_changed % size),
                cut(changed_old).tolist(), cut(changed_new).tolist())],
    }
    counts = {
        "nodes_added": len(nodes_added), "nodes_removed": len(nodes_removed),
        "edges_added": int(added.size), "edges_removed": int(removed.size),
        "weights_changed": int(changed_keys.size),
    }
    truncated = limit is not None and any(counts[k] > len(listings[k]) for k in counts)
    return {**counts, "listings": listings, "truncated": bool(truncated)}
