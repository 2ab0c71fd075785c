"""Community events between two partitions: kept, grown, shrunk, split, merged, new, dissolved."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any, NamedTuple

import numpy as np

from workspace.compare.contingency import ABSENT, UNASSIGNED, ContingencyTable
from workspace.errors import ParameterError

EVENT_KINDS = ("kept", "grown", "shrunk", "split", "merged", "dissolved", "new")


def label_to_json(label: int) -> int | str:
    """Plain JSON form of a community label: ``-2 -> "absent"``, ``-1 -> "unassigned"``."""
    if label == ABSENT:
        return "absent"
    if label == UNASSIGNED:
        return "unassigned"
    return int(label)


@dataclass(frozen=True)
class EventThresholds:
    """Thresholds that decide which communities of A and B are *linked*.

    For communities A_p (size a_p) and B_q (size b_q) sharing n_pq nodes, with
    forward share ``f = n_pq / a_p``, backward share ``g = n_pq / b_q`` and
    Jaccard ``J = n_pq / (a_p + b_q - n_pq)``, the pair is linked when

    ``J >= jaccard``  or  ``(g >= share and f >= min_part)``  or
    ``(f >= share and g >= min_part)``.

    Attributes
    ----------
    jaccard : float, default 0.3
        Jaccard index at which two communities count as the same community
        continuing (Greene, Doyle & Cunningham 2010 match communities across
        time steps by a Jaccard threshold; 0.3 is the value we recall them
        using -- recalled from memory).
    share : float, default 0.5
        Majority share: B_q made mostly of A_p is a part of A_p (split), A_p
        mostly inside B_q is a part of B_q (merge).
    min_part : float, default 0.1
        Smallest share of the *other* community a part must hold, so that a
        few nodes breaking off (or joining) do not count as a split (or merge).
    size_change : float, default 0.1
        A one-to-one continuation is ``grown`` if ``b_q > (1 + size_change) a_p``,
        ``shrunk`` if ``b_q < (1 - size_change) a_p``, else ``kept``.
    """

    jaccard: float = 0.3
    share: float = 0.5
    min_part: float = 0.1
    size_change: float = 0.1

    def __post_init__(self) -> None:
        for name in ("jaccard", "share", "min_part"):
            v = getattr(self, name)
            if not isinstance(v, (int, float)) or not (0.0 < float(v) <= 1.0) or math.isnan(v):
                raise ParameterError(f"event threshold {name} must be in (0, 1], got {v!r}")
        v = self.size_change
        if not isinstance(v, (int, float)) or not (0.0 <= float(v) < 1.0):
            raise ParameterError(f"event threshold size_change must be in [0, 1), got {v!r}")

    @classmethod
    def coerce(cls, value: "EventThresholds | dict[str, float] | None") -> "EventThresholds":
        """Accept an instance, a dict of some fields, or None (defaults)."""
        if value is None:
            return cls()
        if isinstance(value, cls):
            return value
        if isinstance(value, dict):
            unknown = set(value) - {"jaccard", "share", "min_part", "size_change"}
            if unknown:
                raise ParameterError(f"unknown event threshold(s): {', '.join(sorted(unknown))}")
            return cls(**value)
        raise ParameterError(f"event thresholds must be a dict or EventThresholds, got {value!r}")

    def to_dict(self) -> dict[str, float]:
        return {k: float(v) for k, v in asdict(self).items()}


class CommunityEvent(NamedTuple):
    """One event (an immutable named tuple). ``a`` / ``b`` list the communities
    of A / B taking part.

    ``detail`` holds plain JSON-ready values: sizes, overlaps, shares, Jaccard
    indices (see :func:`community_events` for the keys per kind).
    """

    kind: str
    a: tuple[int, ...]
    b: tuple[int, ...]
    detail: dict[str, Any]

    def to_dict(self) -> dict[str, Any]:
        """``{"kind", "a": [...], "b": [...], **detail}`` with labels as in
        :func:`label_to_json`."""
        out: dict[str, Any] = {"kind": self.kind, "a": [label_to_json(x) for x in self.a],
                               "b": [label_to_json(x) for x in self.b]}
        out.update(self.detail)
        return out


def _links(table: ContingencyTable, th: EventThresholds):
    ok = (table.rows[table.cell_row] >= 0) & (table.cols[table.cell_col] >= 0)
    cr = table.cell_row[ok]
    cc = table.cell_col[ok]
    n = table.cell_count[ok]
    sa = table.row_sizes[cr]
    sb = table.col_sizes[cc]
    f = n / sa
    g = n / sb
    jac = n / (sa + sb - n)
    link = (jac >= th.jaccard) | ((g >= th.share) & (f >= th.min_part)) \
        | ((f >= th.share) & (g >= th.min_part))
    return cr[link], cc[link], n[link], f[link], g[link], jac[link]


def community_events(table: ContingencyTable, thresholds: EventThresholds | dict | None = None
                     ) -> list[CommunityEvent]:
    """Classify how each community of A continues into B.

    With the *links* of :class:`EventThresholds` (a bipartite relation between
    communities of A and of B), let out(p) be the B communities linked to A_p
    and in(q) the A communities linked to B_q. Then

    - **dissolved** A_p: out(p) is empty;
    - **new** B_q: in(q) is empty;
    - **split** A_p into out(p): ``|out(p)| >= 2``;
    - **merged** B_q from in(q): ``|in(q)| >= 2``;
    - **kept / grown / shrunk** A_p -> B_q: the link is one-to-one
      (``out(p) = {q}`` and ``in(q) = {p}``), classed by the size ratio with
      ``size_change``.

    A community may take part in a split and a merge at once (many-to-many);
    both events are then reported. Labels -1 (unassigned) and -2 (absent) are
    not communities: they are never linked and get no event, but their nodes
    count in the sizes of the communities they leave or join.

    Parameters
    ----------
    table : ContingencyTable
        A (rows) against B (columns).
    thresholds : EventThresholds or dict or None, default None
        None uses the documented defaults (jaccard 0.3, share 0.5,
        min_part 0.1, size_change 0.1).

    Returns
    -------
    list of CommunityEvent
        Ordered by kind (kept, grown, shrunk, split, merged, dissolved, new),
        then by label. ``detail`` keys: kept/grown/shrunk -- size_a, size_b,
        overlap, jaccard; split -- size_a, parts [{b, overlap, share_of_a,
        jaccard}]; merged -- size_b, parts [{a, overlap, share_of_b, jaccard}];
        dissolved -- size_a, largest_destination {b, overlap} (null if none);
        new -- size_b, largest_source {a, overlap} (null if none).

    Raises
    ------
    ParameterError
        For thresholds outside their ranges.

    Notes
    -----
    The event vocabulary (growth, contraction, merging, splitting, birth,
    death) is that of Palla, Barabási & Vicsek (2007); matching consecutive
    communities by a Jaccard threshold follows Greene, Doyle & Cunningham
    (2010). The share rules add what a Jaccard threshold alone misses: a
    community splitting into many small parts (each part's Jaccard with the
    whole is small, yet each part comes entirely from it).

    References
    ----------
    Palla, G., Barabási, A.-L. & Vicsek, T. (2007). Quantifying social group
    evolution. Nature 446, 664-667.
    Greene, D., Doyle, D. & Cunningham, P. (2010). Tracking the evolution of
    communities in dynamic social networks. Proc. ASONAM 2010, 176-183.
    """
    th = EventThresholds.coerce(thresholds)
    r, c = table.shape
    lr, lc, ln, lf, lg, lj = _links(table, th)
    out_count = np.bincount(lr, minlength=r)
    in_count = np.bincount(lc, minlength=c)
    rows = table.rows.tolist()
    cols = table.cols.tolist()
    cols_json = [label_to_json(x) for x in cols]
    rows_json = [label_to_json(x) for x in rows]
    row_sizes = table.row_sizes.tolist()
    col_sizes = table.col_sizes.tolist()
    by_kind: dict[str, list[CommunityEvent]] = {k: [] for k in EVENT_KINDS}

    one = (out_count[lr] == 1) & (in_count[lc] == 1)
    for p, q, n, j in zip(lr[one].tolist(), lc[one].tolist(), ln[one].tolist(), lj[one].tolist()):
        sa, sb = row_sizes[p], col_sizes[q]
        if sb > (1.0 + th.size_change) * sa:
            kind = "grown"
        elif sb < (1.0 - th.size_change) * sa:
            kind = "shrunk"
        else:
            kind = "kept"
        by_kind[kind].append(CommunityEvent(kind, (rows[p],), (cols[q],),
                                            {"size_a": sa, "size_b": sb, "overlap": n,
                                             "jaccard": j}))

    # Links are sorted by (row, col) because the table's cells are.
    split_rows = np.flatnonzero(out_count >= 2)
    if split_rows.shape[0]:
        starts = np.searchsorted(lr, split_rows, side="left")
        stops = np.searchsorted(lr, split_rows, side="right")
        for p, s0, s1 in zip(split_rows.tolist(), starts.tolist(), stops.tolist()):
            parts = [{"b": cols_json[q], "overlap": n, "share_of_a": f, "jaccard": j}
                     for q, n, f, j in zip(lc[s0:s1].tolist(), ln[s0:s1].tolist(),
                                           lf[s0:s1].tolist(), lj[s0:s1].tolist())]
            by_kind["split"].append(CommunityEvent(
                "split", (rows[p],), tuple(cols[q] for q in lc[s0:s1].tolist()),
                {"size_a": row_sizes[p], "parts": parts}))

    merge_cols = np.flatnonzero(in_count >= 2)
    if merge_cols.shape[0]:
        o = np.argsort(lc, kind="stable")  # by column, rows ascending within
        lc_o = lc[o]
        starts = np.searchsorted(lc_o, merge_cols, side="left")
        stops = np.searchsorted(lc_o, merge_cols, side="right")
        for q, s0, s1 in zip(merge_cols.tolist(), starts.tolist(), stops.tolist()):
            idx = o[s0:s1]
            parts = [{"a": rows_json[p], "overlap": n, "share_of_b": g, "jaccard": j}
                     for p, n, g, j in zip(lr[idx].tolist(), ln[idx].tolist(),
                                           lg[idx].tolist(), lj[idx].tolist())]
            by_kind["merged"].append(CommunityEvent(
                "merged", tuple(rows[p] for p in lr[idx].tolist()), (cols[q],),
                {"size_b": col_sizes[q], "parts": parts}))

    # Largest other-side overlap (any label, including unassigned / absent).
    def _largest(along_rows: bool) -> tuple[np.ndarray, np.ndarray]:
        key_pos = table.cell_row if along_rows else table.cell_col
        other = table.cell_col if along_rows else table.cell_row
        size = r if along_rows else c
        best_n = np.zeros(size, dtype=np.int64)
        best_o = np.full(size, -1, dtype=np.int64)
        o = np.lexsort((other, -table.cell_count, key_pos))
        first = np.ones(o.shape[0], dtype=bool)
        first[1:] = key_pos[o][1:] != key_pos[o][:-1]
        sel = o[first]
        best_n[key_pos[sel]] = table.cell_count[sel]
        best_o[key_pos[sel]] = other[sel]
        return best_n, best_o

    dis = np.flatnonzero((out_count == 0) & (table.rows >= 0))
    if dis.shape[0]:
        bn, bo = _largest(True)
        by_kind["dissolved"] = [
            CommunityEvent("dissolved", (rows[p],), (), {
                "size_a": row_sizes[p],
                "largest_destination": None if q < 0 else {"b": cols_json[q], "overlap": o}})
            for p, q, o in zip(dis.tolist(), bo[dis].tolist(), bn[dis].tolist())]
    new = np.flatnonzero((in_count == 0) & (table.cols >= 0))
    if new.shape[0]:
        bn, bo = _largest(False)
        by_kind["new"] = [
            CommunityEvent("new", (), (cols[q],), {
                "size_b": col_sizes[q],
                "largest_source": None if p < 0 else {"a": rows_json[p], "overlap": o}})
            for q, p, o in zip(new.tolist(), bo[new].tolist(), bn[new].tolist())]
    return [e for k in EVENT_KINDS for e in by_kind[k]]
