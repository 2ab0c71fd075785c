"""Structural difference of two canonical graphs."""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from workspace.domain import GraphData, comparable_strings, merge_sorted_ids
from workspace.io._common import id_strings


def _pair_keys(graph: GraphData, position: np.ndarray | None, size: int) -> np.ndarray:
    """Keys ``p(u) * size + p(v)`` of a graph's edges in the union id space (``position`` None: the
    identity), in one array (75M edges: each temporary is 600 MB)."""
    if position is None:
        keys = graph.edge_u.astype(np.int64)
        keys *= size
        keys += graph.edge_v
        return keys
    keys = np.take(position, graph.edge_u)
    keys *= size
    keys += np.take(position, graph.edge_v)
    return keys


#: :func:`_sorted_positions` searches this many keys at a time.
SEARCH_CHUNK = 1 << 16


def _sorted_positions(haystack: np.ndarray, needles: np.ndarray) -> np.ndarray:
    """``np.searchsorted(haystack, needles)`` for sorted ``needles``: chunk by chunk, each in the slice
    of ``haystack`` between the positions of its first key and of the next chunk's, so that the
    binary searches stay in a slice that fits the cache (75M keys in 75M: 2.0 s in one call)."""
    if needles.size <= SEARCH_CHUNK:
        return np.searchsorted(haystack, needles)
    firsts = needles[::SEARCH_CHUNK]
    bounds = np.append(np.searchsorted(haystack, firsts), haystack.size)
    out = np.empty(needles.size, dtype=np.intp)
    for c in range(firsts.size):
        lo, hi = int(bounds[c]), int(bounds[c + 1])
        a = c * SEARCH_CHUNK
        b = min(needles.size, a + SEARCH_CHUNK)
        np.add(np.searchsorted(haystack[lo:hi], needles[a:b]), lo, out=out[a:b])
    return out


CHANGE_KINDS = ("nodes_added", "nodes_removed", "edges_added", "edges_removed", "weights_changed")


def no_changes() -> dict:
    """What :func:`structural_changes` returns for two equal graphs: every count 0, every listing
    empty (for callers that know the graphs are equal, e.g. by their content hash, without loading
    them)."""
    return {**{k: 0 for k in CHANGE_KINDS}, "listings": {k: [] for k in CHANGE_KINDS}, "truncated": False}


def _one_weight(w_old: np.ndarray, w_new: np.ndarray) -> bool:
    """Whether every weight of both graphs is one and the same value (compared with ``==``, as the
    weight comparison below is): then no common edge can have changed its weight."""
    if w_old.size == 0 or w_new.size == 0:
        return True
    first = w_old[:1]
    return bool(np.all(w_old == first) and np.all(w_new == first))


def structural_changes(old: GraphData, new: GraphData, *, limit: int | None = None) -> dict:
    """Nodes and edges added and removed, and weights changed, from ``old`` to ``new``.

    With ``U = sorted(ids(old) ∪ ids(new))`` and ``p`` the position of an id
    in ``U``, an edge ``{a, b}`` is the int64 key ``p(a) * |U| + p(b)``
    (``p(a) <= p(b)``). Since both graphs are canonical and ``p`` is
    increasing, each graph's keys are already sorted and unique, and

    ``edges_added = K_new \\ K_old``, ``edges_removed = K_old \\ K_new``,
    ``weights_changed = {k in K_old ∩ K_new : w_old(k) != w_new(k)}``

    are found with ``np.searchsorted`` (O(m log m), no Python loop per edge). The ids are
    compared as Arrow strings: two sorted lists that differ in at most
    :data:`workspace.domain.MERGE_MAX_DIFFERENCES` ids (a network's next version) are merged in
    order (:func:`workspace.domain.merge_sorted_ids`; 10M 40-character ids differing in two: 0.18 s
    instead of 20.6 s); otherwise ``is_in`` and ``index_in`` (hash sets) and ``U`` sorted by
    ``sort_indices`` (UTF-8 byte order, which is code point order); two graphs of the same nodes
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
    ids_old, ids_new = comparable_strings(id_strings(old.node_ids), id_strings(new.node_ids))
    same = ids_old.equals(ids_new)
    merged = None if same else merge_sorted_ids(ids_old, ids_new)
    if same:
        # the same nodes (weights or edges changed): the union is either list, positions the identity
        size = len(ids_old)
        pos_old = pos_new = None        # the identity
        nodes_added = nodes_removed = ids_old.slice(0, 0)

        def union_ids(positions: np.ndarray) -> list[str]:
            return ids_old.take(pa.array(positions, type=pa.int64())).to_pylist()
    elif merged is not None:
        # a few ids in only one list (a network's next version): merged in order, no hash set or sort
        only_old, only_new, pos_old, pos_new, size = merged
        # increasing positions that end where the list does are the identity (no id of the other list
        # comes before any of its ids: e.g. new ids that sort after all the old ones)
        identity_old = pos_old.size == 0 or int(pos_old[-1]) == pos_old.size - 1
        identity_new = pos_new.size == 0 or int(pos_new[-1]) == pos_new.size - 1
        nodes_removed = ids_old.take(pa.array(only_old, type=pa.int64()))
        nodes_added = ids_new.take(pa.array(only_new, type=pa.int64()))
        source = np.empty(size, dtype=np.int64)       # union position -> index in old, or in new + len(old)
        source[pos_old] = np.arange(len(ids_old), dtype=np.int64)
        source[pos_new[only_new]] = len(ids_old) + only_new

        def union_ids(positions: np.ndarray) -> list[str]:
            at = source[positions]
            from_old = at < len(ids_old)
            out = np.empty(at.shape[0], dtype=object)
            out[from_old] = ids_old.take(pa.array(at[from_old], type=pa.int64())).to_pylist()
            out[~from_old] = ids_new.take(pa.array(at[~from_old] - len(ids_old), type=pa.int64())).to_pylist()
            return out.tolist()

        pos_old = None if identity_old else pos_old
        pos_new = None if identity_new else pos_new
    else:
        nodes_added = ids_new.filter(pc.invert(pc.is_in(ids_new, value_set=ids_old)))
        nodes_removed = ids_old.filter(pc.invert(pc.is_in(ids_old, value_set=ids_new)))
        union = pa.concat_arrays([ids_old, nodes_added])
        union = union.take(pc.sort_indices(union))   # UTF-8 byte order = code point order
        size = len(union)
        pos_old = pc.index_in(ids_old, value_set=union).to_numpy().astype(np.int64)
        pos_new = pc.index_in(ids_new, value_set=union).to_numpy().astype(np.int64)

        def union_ids(positions: np.ndarray) -> list[str]:
            return union.take(pa.array(positions, type=pa.int64())).to_pylist()

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

    at = _sorted_positions(key_old, key_new)
    at_clipped = np.minimum(at, max(key_old.size - 1, 0))
    in_old = (at < key_old.size) & (key_old[at_clipped] == key_new) if key_old.size else \
        np.zeros(key_new.size, dtype=bool)
    del at_clipped
    added = key_new[~in_old]
    common_old = at[in_old]
    del at
    if _one_weight(w_old, w_new):    # e.g. two unweighted versions: no weight can have changed
        changed_keys = key_new[:0]
        changed_old = changed_new = w_new[:0]
    else:
        common_new = np.flatnonzero(in_old)
        changed = np.flatnonzero(w_old[common_old] != w_new[common_new])
        changed_keys = key_new[common_new[changed]]
        changed_old = w_old[common_old[changed]]
        changed_new = w_new[common_new[changed]]
        del common_new, changed
    kept_old = np.zeros(key_old.size, dtype=bool)
    kept_old[common_old] = True
    removed = key_old[~kept_old]

    def cut(values):
        return values if limit is None else values[:max(int(limit), 0)]

    def ids_at(positions: np.ndarray) -> list[str]:
        return union_ids(np.asarray(positions, dtype=np.int64))

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
