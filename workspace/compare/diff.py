"""Full comparison of two memberships (scores, matching, events, moved nodes) and chains of runs."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from workspace.compare.alignment import align_nodes
from workspace.compare.contingency import (
    ABSENT, UNASSIGNED, ContingencyTable, _factorize_labels, _table_from_codes,
)
from workspace.compare.events import (
    EVENT_KINDS, CommunityEvent, EventThresholds, community_events, label_to_json,
)
from workspace.compare.matching import CommunityMatch, _match_positions, _matches_from_positions
from workspace.compare.scores import (
    _adjusted_mutual_info, _adjusted_rand_index, _check_normalization, _entropy_of_sizes,
    _mutual_information, _normalized_mutual_info,
    _variation_of_information,
)
from workspace.domain import PackedNodeIds
from workspace.errors import ComputeError, ParameterError, UsageError

NODE_MODES = ("common", "all")
#: ``from_match`` value of a moved node whose A community has no match.
NO_MATCH = -3
#: Largest table (r * c cells) given in dense form on request.
DENSE_LIMIT = 10_000


@dataclass(frozen=True, eq=False)
class MembershipDiff:
    """Result of :func:`compare_memberships`.

    Scores are over the *scored* nodes (the shared nodes for
    ``nodes="common"``, the union for ``nodes="all"``). Arrays hold node ids
    (str) and labels (int64; -1 unassigned, -2 absent); :meth:`to_dict` turns
    everything into plain JSON types.

    Attributes
    ----------
    ari, nmi, ami, vi_nats, vi_bits : float
        Scores (see ``workspace.compare.scores``); NMI and AMI use
        ``nmi_normalization``.
    nmi_normalization : str
    nodes : {"common", "all"}
    n_a, n_b, n_common, n_scored : int
        Node counts of A, B, A ∩ B and of the scored set.
    only_in_a_ids, only_in_b_ids : ndarray of str
        Ids found on one side only (ascending).
    coverage : float
        ``|A ∩ B| / |A ∪ B|``.
    k_a, k_b : int
        Communities (labels >= 0) of A and of B among the scored nodes.
    table : ContingencyTable
        A (rows) against B (columns) over the scored nodes.
    matches : tuple of CommunityMatch
    events : tuple of CommunityEvent
    event_thresholds : EventThresholds
    moved : int
        Number of moved nodes.
    moved_ids : ndarray of str, shape (m,)
        Moved node ids ascending, at most ``moved_limit`` of them.
    moved_from, moved_to, moved_from_match : ndarray of int64, shape (m,)
        Community in A, community in B, and the B community matched to the A
        community (-3 when it has none).
    """

    ari: float
    nmi: float
    nmi_normalization: str
    ami: float
    vi_nats: float
    vi_bits: float
    nodes: str
    n_a: int
    n_b: int
    n_common: int
    n_scored: int
    only_in_a_ids: np.ndarray
    only_in_b_ids: np.ndarray
    coverage: float
    k_a: int
    k_b: int
    table: ContingencyTable
    matches: tuple[CommunityMatch, ...]
    events: tuple[CommunityEvent, ...]
    event_thresholds: EventThresholds
    moved: int
    moved_ids: np.ndarray
    moved_from: np.ndarray
    moved_to: np.ndarray
    moved_from_match: np.ndarray

    @property
    def only_in_a(self) -> int:
        return int(self.only_in_a_ids.shape[0])

    @property
    def only_in_b(self) -> int:
        return int(self.only_in_b_ids.shape[0])

    def contingency_dict(self, dense: bool = False) -> dict[str, Any]:
        """The contingency table as plain types, sparse: only the non-zero cells.

        Keys: ``rows`` / ``cols`` (community labels of A / B, "absent" and
        "unassigned" for the special groups), ``row_sizes``, ``col_sizes``,
        ``shape`` ``[r, c]``, ``nnz`` and ``cells``: ``[a, b, count]`` for every
        non-zero cell, with ``a`` / ``b`` the community labels (as in rows /
        cols), ordered by a then b. With ``dense=True`` (tables of at most
        :data:`DENSE_LIMIT` cells, else :class:`ParameterError`) also
        ``counts``, the dense r x c list of lists in rows / cols order.
        """
        t = self.table
        r, c = t.shape
        rows = [label_to_json(x) for x in t.rows.tolist()]
        cols = [label_to_json(x) for x in t.cols.tolist()]
        if t.nnz and (t.rows[0] < 0 or t.cols[0] < 0):
            cells = [[rows[p], cols[q], n] for p, q, n in
                     zip(t.cell_row.tolist(), t.cell_col.tolist(), t.cell_count.tolist())]
        else:  # no special label: the labels are the plain int64 values
            cells = np.stack([t.rows[t.cell_row], t.cols[t.cell_col], t.cell_count],
                             axis=1).tolist()
        out = {"rows": rows, "cols": cols,
               "row_sizes": t.row_sizes.tolist(), "col_sizes": t.col_sizes.tolist(),
               "shape": [r, c], "nnz": t.nnz, "cells": cells}
        if dense:
            if r * c > DENSE_LIMIT:
                raise ParameterError(
                    f"the contingency table is {r} x {c} = {r * c:,} cells; the dense form is "
                    f"only given up to {DENSE_LIMIT:,} cells (use the sparse cells)")
            out["counts"] = t.dense().tolist()
        return out

    def _moved_columns(self) -> tuple[list, list, list, list]:
        """Moved node ids, from, to, from_match as plain lists (special labels as strings,
        no match as None)."""
        def col(arr: np.ndarray) -> list:
            values = arr.tolist()
            if arr.shape[0] and int(arr.min()) < 0:
                values = [x if x >= 0 else (None if x == NO_MATCH else label_to_json(x))
                          for x in values]
            return values
        return (self.moved_ids.tolist(), col(self.moved_from), col(self.moved_to),
                col(self.moved_from_match))

    def moved_nodes(self) -> list[dict[str, Any]]:
        """Moved nodes as ``{"node", "from", "to", "from_match"}`` dicts (ascending id)."""
        return [{"node": v, "from": f, "to": t, "from_match": m}
                for v, f, t, m in zip(*self._moved_columns())]

    def moved_rows(self) -> list[list[Any]]:
        """Moved nodes as ``[node, from, to, from_match]`` rows (ascending id)."""
        return list(map(list, zip(*self._moved_columns())))

    def to_dict(self, dense: bool = False, moved_rows: bool = False) -> dict[str, Any]:
        """JSON-ready dict (plain str / int / float / list / dict / None only);
        ``dense`` adds the dense table (see :meth:`contingency_dict`); ``moved_rows``
        gives ``moved_nodes`` as ``[node, from, to, from_match]`` rows instead of dicts."""
        return {
            "ari": self.ari, "nmi": self.nmi, "nmi_normalization": self.nmi_normalization,
            "ami": self.ami, "ami_normalization": self.nmi_normalization,
            "vi_nats": self.vi_nats, "vi_bits": self.vi_bits,
            "nodes": self.nodes, "n_a": self.n_a, "n_b": self.n_b,
            "n_common": self.n_common, "n_scored": self.n_scored,
            "only_in_a": self.only_in_a, "only_in_b": self.only_in_b,
            "only_in_a_nodes": self.only_in_a_ids.tolist(),
            "only_in_b_nodes": self.only_in_b_ids.tolist(),
            "coverage": self.coverage, "k_a": self.k_a, "k_b": self.k_b,
            "moved": self.moved,
            "moved_nodes": self.moved_rows() if moved_rows else self.moved_nodes(),
            "moved_nodes_truncated": self.moved > int(self.moved_ids.shape[0]),
            "matches": [m.to_dict() for m in self.matches],
            "events": [e.to_dict() for e in self.events],
            "event_thresholds": self.event_thresholds.to_dict(),
            "contingency": self.contingency_dict(dense),
        }


def _id_array(ids) -> np.ndarray:
    """Node ids as a numpy ``str`` array (packed ids decoded, object arrays converted)."""
    if isinstance(ids, PackedNodeIds):
        return ids.decode()
    arr = np.asarray(ids)
    return arr.astype(np.str_) if arr.dtype.kind == "O" else arr


def _check_labels(labels, n: int, name: str) -> np.ndarray:
    arr = np.asarray(labels)
    if arr.ndim != 1 or arr.shape[0] != n:
        raise UsageError(f"{name} must be a 1-D array aligned with its node ids "
                         f"({n} entries), got shape {arr.shape}")
    if n == 0:
        return np.zeros(0, dtype=np.int64)
    if arr.dtype.kind not in "iu":
        raise UsageError(f"{name} must hold integer community labels, got dtype {arr.dtype}")
    arr = arr.astype(np.int64, copy=False)
    if int(arr.min()) < UNASSIGNED:
        raise UsageError(f"{name} holds label {int(arr.min())}; labels are 0..k-1, "
                         f"or -1 for a node left unassigned")
    return arr


def compare_memberships(node_ids_a, labels_a, node_ids_b, labels_b, *, nodes: str = "common",
                        nmi_normalization: str = "arithmetic",
                        event_thresholds: EventThresholds | dict | None = None,
                        moved_limit: int | None = None,
                        tail_mass: float = 1e-40) -> MembershipDiff:
    """Compare two memberships: scores, matching, events and moved nodes.

    Runs on different network versions are aligned by node id: with
    ``nodes="common"`` the scores use the n_common shared nodes; with
    ``nodes="all"`` they use the union, where a node missing from one side
    sits in that side's extra community "absent" (label -2), so adding or
    removing nodes lowers the agreement.

    .. math:: \\mathrm{coverage} = |A \\cap B| / |A \\cup B|

    Parameters
    ----------
    node_ids_a, node_ids_b : ndarray of str, shape (n_a,), (n_b,), or PackedNodeIds
        Canonical node ids of the two network versions (sorted ascending,
        unique). The same :class:`workspace.domain.PackedNodeIds` object on
        both sides (runs of one stored version) is never decoded as a whole:
        only the moved nodes listed are.
    labels_a, labels_b : ndarray of int, shape (n_a,), (n_b,)
        Community of each node, 0..k-1; -1 marks a node left unassigned. If
        present, the unassigned nodes form one more group for the scores; they
        are never matched and get no event.
    nodes : {"common", "all"}, default "common"
    nmi_normalization : {"arithmetic", "geometric", "max", "min"}, default "arithmetic"
        Mean of the entropies used by NMI and AMI.
    event_thresholds : EventThresholds or dict or None, default None
        See :class:`~workspace.compare.events.EventThresholds`.
    moved_limit : int or None, default None
        Keep at most this many moved nodes in the list (the count ``moved``
        is always complete); None keeps all.
    tail_mass : float, default 1e-40
        See :func:`~workspace.compare.scores.expected_mutual_information`.

    Returns
    -------
    MembershipDiff

    Raises
    ------
    UsageError
        For malformed arrays (not canonical ids, labels not aligned, labels
        below -1).
    ParameterError
        For an unknown ``nodes`` or normalisation, bad thresholds or a
        negative ``moved_limit``.
    ComputeError
        When there is no node to score: the node sets share no id with
        ``nodes="common"``, or both are empty.

    Notes
    -----
    *Moved* nodes are shared nodes whose A community is not matched (by
    :func:`~workspace.compare.matching.match_communities`) to the B
    community they are in; a node of an unmatched A community always counts
    as moved, and so does a node moving to or from "unassigned" (a node
    unassigned on both sides does not). Nodes on one side only are reported
    in ``only_in_a`` / ``only_in_b``, never as moved. Renaming the labels of
    either side changes no score and moves no node.

    References
    ----------
    Hubert & Arabie (1985); Vinh, Epps & Bailey (2010); Meilă (2007); Kuhn
    (1955); Palla, Barabási & Vicsek (2007); Greene, Doyle & Cunningham (2010)
    -- see the functions used.
    """
    if nodes not in NODE_MODES:
        raise ParameterError(f"nodes must be 'common' or 'all', got {nodes!r}")
    _check_normalization(nmi_normalization)
    thresholds = EventThresholds.coerce(event_thresholds)
    if moved_limit is not None and (not isinstance(moved_limit, (int, np.integer))
                                    or isinstance(moved_limit, bool) or moved_limit < 0):
        raise ParameterError(f"moved_limit must be a non-negative integer or None, "
                             f"got {moved_limit!r}")
    if not (0.0 <= tail_mass < 1.0):
        raise ParameterError(f"tail_mass must be in [0, 1), got {tail_mass}")

    al = align_nodes(node_ids_a, node_ids_b)
    ids_a, ids_b = node_ids_a, node_ids_b
    if isinstance(ids_a, PackedNodeIds) and ids_b is ids_a:
        take_a = take_b = ids_a.take  # one version: only the listed ids are decoded
    elif isinstance(ids_a, PackedNodeIds) and isinstance(ids_b, PackedNodeIds):
        # two versions: only the listed ids are decoded too (the alignment merged the packed lists,
        # or decoded them and take reads those)
        take_a, take_b = ids_a.take, ids_b.take
    else:
        ids_a, ids_b = (_id_array(ids_a), _id_array(ids_b))
        take_a, take_b = ids_a.__getitem__, ids_b.__getitem__
    la_full = _check_labels(labels_a, al.n_a, "labels_a")
    lb_full = _check_labels(labels_b, al.n_b, "labels_b")

    if nodes == "common":
        if al.n_common == 0:
            raise ComputeError(
                f"the two memberships share no node id ({al.n_a} and {al.n_b} nodes); "
                f"use nodes='all' to compare them with absent nodes")
        if al.identical:
            la, lb = la_full, lb_full
        else:
            la, lb = la_full[al.common_a], lb_full[al.common_b]
        common_pos = None  # every scored node is shared, in A's order
    else:
        if al.n_union == 0:
            raise ComputeError("both memberships are empty; nothing to compare")
        lb_on_a = np.full(al.n_a, ABSENT, dtype=np.int64)
        lb_on_a[al.common_a] = lb_full[al.common_b]
        la = np.concatenate([la_full, np.full(al.only_b.shape[0], ABSENT, dtype=np.int64)])
        lb = np.concatenate([lb_on_a, lb_full[al.only_b]])
        common_pos = al.common_a

    va, ca, _ = _factorize_labels(la)
    vb, cb, _ = _factorize_labels(lb)
    table = _table_from_codes(va, ca, vb, cb)

    mi = _mutual_information(table)
    h = (_entropy_of_sizes(table.row_sizes, table.n), _entropy_of_sizes(table.col_sizes, table.n))
    ari = _adjusted_rand_index(table)
    nmi = _normalized_mutual_info(table, nmi_normalization, mi=mi, h=h)
    ami = _adjusted_mutual_info(table, nmi_normalization, tail_mass, mi=mi, h=h)
    vi_nats, vi_bits = _variation_of_information(table)

    mr, mc = _match_positions(table)
    matches = _matches_from_positions(table, mr, mc)
    events = community_events(table, thresholds)

    # Moved nodes, over the shared nodes only.
    r, c = table.shape
    match_of_row = np.full(r, -1, dtype=np.int64)
    match_of_row[mr] = mc
    if common_pos is None:
        ca_c, cb_c = ca, cb
    else:
        ca_c, cb_c = ca[common_pos], cb[common_pos]
    expected = match_of_row[ca_c]
    moved_mask = expected != cb_c
    unassigned_both = (va[ca_c] == UNASSIGNED) & (vb[cb_c] == UNASSIGNED)
    moved_mask &= ~unassigned_both
    moved_pos = np.flatnonzero(moved_mask)
    n_moved = int(moved_pos.shape[0])
    if moved_limit is not None:
        moved_pos = moved_pos[:moved_limit]
    if common_pos is None:
        src = moved_pos if al.identical else al.common_a[moved_pos]
    else:
        src = common_pos[moved_pos]
    moved_ids = take_a(src)
    moved_from = va[ca_c[moved_pos]]
    moved_to = vb[cb_c[moved_pos]]
    exp = expected[moved_pos]
    moved_from_match = np.where(exp >= 0, vb[np.maximum(exp, 0)], NO_MATCH).astype(np.int64)

    return MembershipDiff(
        ari=float(ari), nmi=float(nmi), nmi_normalization=nmi_normalization, ami=float(ami),
        vi_nats=vi_nats, vi_bits=vi_bits, nodes=nodes, n_a=al.n_a, n_b=al.n_b,
        n_common=al.n_common, n_scored=table.n,
        only_in_a_ids=take_a(al.only_a), only_in_b_ids=take_b(al.only_b),
        coverage=al.coverage, k_a=int(np.count_nonzero(va >= 0)),
        k_b=int(np.count_nonzero(vb >= 0)), table=table, matches=tuple(matches),
        events=tuple(events), event_thresholds=thresholds, moved=n_moved,
        moved_ids=moved_ids, moved_from=moved_from, moved_to=moved_to,
        moved_from_match=moved_from_match,
    )


@dataclass(frozen=True)
class CommunityThread:
    """A community followed through one-to-one continuations over consecutive runs.

    Attributes
    ----------
    thread : int
        Thread number (0-based, in order of first run then community label).
    path : tuple of (int, int, int)
        ``(run_index, community, size)`` for each run the thread spans, with
        the community's size in that run's full membership.
    origin : tuple of str
        ``("first_run",)`` for communities of the first run, otherwise the
        kinds of the events in which the community appeared on the B side
        ("new", "split", "merged"), or ``("not_compared",)`` if none of its
        nodes were scored.
    fate : tuple of str
        ``("last_run",)`` if the thread reaches the last run, otherwise the
        kinds of the events in which its last community took part on the A
        side ("split", "merged", "dissolved"), or ``("not_compared",)``.
    """

    thread: int
    path: tuple[tuple[int, int, int], ...]
    origin: tuple[str, ...]
    fate: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class TrackResult:
    """Result of :func:`track_memberships`: step diffs and community threads."""

    runs: tuple[str, ...]
    diffs: tuple[MembershipDiff, ...]
    threads: tuple[CommunityThread, ...]

    def to_dict(self, dense: bool = False, moved_rows: bool = False) -> dict[str, Any]:
        """JSON-ready dict: ``runs``, ``steps`` (each a diff dict plus ``from_run`` /
        ``to_run``) and ``lineage`` (threads with ``path`` entries ``{run, community,
        size}``, ``origin`` and ``fate``)."""
        steps = []
        for i, d in enumerate(self.diffs):
            entry = {"from_run": self.runs[i], "to_run": self.runs[i + 1]}
            entry.update(d.to_dict(dense, moved_rows))
            steps.append(entry)
        lineage = [{"thread": t.thread,
                    "path": [{"run": self.runs[i], "community": k, "size": s}
                             for i, k, s in t.path],
                    "origin": list(t.origin), "fate": list(t.fate)} for t in self.threads]
        return {"runs": list(self.runs), "steps": steps, "lineage": lineage}


_CONTINUE = ("kept", "grown", "shrunk")


def track_memberships(sequence: Sequence[tuple[str, Any, Any]], *, nodes: str = "common",
                      nmi_normalization: str = "arithmetic",
                      event_thresholds: EventThresholds | dict | None = None,
                      moved_limit: int | None = None) -> TrackResult:
    """Diff a chain of runs step by step and follow communities through it.

    For runs R_0, ..., R_{T-1}, step t is ``compare_memberships(R_t, R_{t+1})``.
    A *thread* starts at every community of R_0 and at every community of
    R_{t+1} that is not the one-to-one continuation (kept, grown or shrunk
    event) of a community of R_t; it extends along continuations and ends
    where its community splits, merges, dissolves, or at the last run.

    Parameters
    ----------
    sequence : sequence of (str, ndarray of str, ndarray of int)
        ``(run_label, node_ids, labels)`` per run, in order; at least two.
    nodes, nmi_normalization, event_thresholds, moved_limit
        Passed to :func:`compare_memberships` for every step.

    Returns
    -------
    TrackResult
        ``diffs[t]`` compares run t with run t+1; ``threads`` cover every
        community (label >= 0) of every run exactly once.

    Raises
    ------
    UsageError
        If fewer than two runs are given or an entry is malformed.
    ComputeError, ParameterError
        As :func:`compare_memberships`.

    Notes
    -----
    Each community of each run lies on exactly one thread, so the threads
    partition all (run, community) pairs. A community that both continues
    and takes part in nothing else is one step of a thread; the events of
    each step remain available in ``diffs``.

    References
    ----------
    Palla, G., Barabási, A.-L. & Vicsek, T. (2007). Nature 446, 664-667;
    Greene, D., Doyle, D. & Cunningham, P. (2010). Proc. ASONAM, 176-183.
    """
    runs = list(sequence)
    if len(runs) < 2:
        raise UsageError(f"tracking needs at least two runs, got {len(runs)}")
    for i, entry in enumerate(runs):
        if not isinstance(entry, (tuple, list)) or len(entry) != 3:
            raise UsageError(f"run {i}: expected (label, node_ids, labels)")
    labels = tuple(str(e[0]) for e in runs)
    diffs = tuple(compare_memberships(runs[t][1], runs[t][2], runs[t + 1][1], runs[t + 1][2],
                                      nodes=nodes, nmi_normalization=nmi_normalization,
                                      event_thresholds=event_thresholds,
                                      moved_limit=moved_limit)
                  for t in range(len(runs) - 1))
    # Community sizes of each run over its full membership.
    sizes: list[dict[int, int]] = []
    for _, _, lab in runs:
        values, _, counts = _factorize_labels(np.asarray(lab, dtype=np.int64).reshape(-1))
        sizes.append({int(v): int(s) for v, s in zip(values.tolist(), counts.tolist()) if v >= 0})

    cont: list[dict[int, int]] = []      # step t: community of run t -> of run t+1
    fate_kinds: list[dict[int, list[str]]] = []
    origin_kinds: list[dict[int, list[str]]] = []
    for d in diffs:
        cmap: dict[int, int] = {}
        fk: dict[int, list[str]] = {}
        ok: dict[int, list[str]] = {}
        for e in d.events:
            if e.kind in _CONTINUE:
                cmap[e.a[0]] = e.b[0]
                continue
            for a in e.a:
                fk.setdefault(a, []).append(e.kind)
            for b in e.b:
                ok.setdefault(b, []).append(e.kind)
        cont.append(cmap)
        fate_kinds.append(fk)
        origin_kinds.append(ok)

    def _kinds(found: list[str] | None) -> tuple[str, ...]:
        if not found:
            return ("not_compared",)
        return tuple(k for k in EVENT_KINDS if k in set(found))

    threads: list[CommunityThread] = []
    continued_into: list[set[int]] = [set()] + [set(c.values()) for c in cont]
    last = len(runs) - 1
    for t in range(len(runs)):
        for comm in sorted(sizes[t]):
            if comm in continued_into[t]:
                continue
            origin = ("first_run",) if t == 0 else _kinds(origin_kinds[t - 1].get(comm))
            path = [(t, comm, sizes[t][comm])]
            u, cur = t, comm
            while u < last and cur in cont[u]:
                cur = cont[u][cur]
                u += 1
                path.append((u, cur, sizes[u][cur]))
            fate = ("last_run",) if u == last else _kinds(fate_kinds[u].get(cur))
            threads.append(CommunityThread(len(threads), tuple(path), origin, fate))
    return TrackResult(labels, diffs, tuple(threads))


__all__ = ["MembershipDiff", "compare_memberships", "CommunityThread", "TrackResult",
           "track_memberships", "NODE_MODES", "NO_MATCH"]
