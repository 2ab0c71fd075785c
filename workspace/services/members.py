"""Which nodes a run put in each community, and pairwise comparison matrices of several runs."""

from __future__ import annotations

from typing import Any

import numpy as np

from workspace.errors import NotFoundError, ParameterError, UsageError
from workspace.services import runs as runs_service
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import Run

MAX_MATRIX_RUNS = 50


class RunMembers:
    """A finished run's membership indexed by community, loaded once: :meth:`page` answers
    :func:`run_members` for any community without reading the store again (the UI's Members pane
    keeps one per open run)."""

    def __init__(self, store: Store, run_id: int) -> None:
        from workspace.services.tracking import shown_labels_of

        self.run_id = run_id
        # the ids as stored, only the listed ones decoded (10M 40-character ids: 1.6 GB as numpy
        # strings for a page of 50)
        self.node_ids, labels, self.summary = runs_service.load_membership(store, run_id, packed=True)
        self.stability = None
        with store.read() as s:
            run = s.get(Run, run_id)
            if run.stability_blob:
                self.stability = repo.get_array(s, run.stability_blob) / max(run.repeats, 1)
        self.n_nodes = int(labels.shape[0])
        self.k = k = int(labels.max()) + 1 if labels.size and labels.max() >= 0 else 0
        # a tracked run: labels matched to the previous version's run
        self.stored_map = stored_map = shown_labels_of(store, run_id)
        self.shown_of = ([int(x) for x in stored_map["map"]] if stored_map and len(stored_map["map"]) == k
                         else list(range(k)))
        self.order = np.argsort(labels, kind="stable")  # node order kept within each community
        self.bounds = np.searchsorted(labels[self.order], np.arange(-1, k + 1))

    def page(self, community: int | None = None, limit: int | None = None, offset: int = 0) -> dict[str, Any]:
        """See :func:`run_members`."""
        if limit is not None and limit < 0:
            raise UsageError(f"--limit must be 0 or more, got {limit}")
        if offset < 0:
            raise UsageError(f"--offset must be 0 or more, got {offset}")
        k, shown_of, run_id = self.k, self.shown_of, self.run_id
        if community is not None and self.stored_map is not None:
            if community not in shown_of:
                raise NotFoundError(f"run {run_id} shows no community {community} (its communities are numbered "
                                    f"{', '.join(map(str, sorted(shown_of)))})")
            community = shown_of.index(community)
        elif community is not None and not 0 <= community < k:
            raise NotFoundError(f"run {run_id} has no community {community} (its communities are 0 to {k - 1})")
        order, bounds, node_ids, stability = self.order, self.bounds, self.node_ids, self.stability
        wanted = [community] if community is not None else list(range(k))
        out_comms = []
        for c in wanted:
            members = order[bounds[c + 1]:bounds[c + 2]]
            shown = members[offset:] if limit is None else members[offset:offset + limit]
            nodes = node_ids.take(shown).tolist()
            entry = {"community": c, "shown": shown_of[c], "size": int(members.shape[0]), "offset": offset,
                     "nodes": nodes, "truncated": bool(offset > 0 or offset + len(nodes) < members.shape[0])}
            if stability is not None:
                entry["stability"] = [float(x) for x in stability[shown]]
            out_comms.append(entry)
        unassigned = node_ids.take(order[bounds[0]:bounds[1]]).tolist() if community is None else []
        summary = self.summary
        return {"run": run_id, "ref": summary["ref"], "method": summary["method"], "kind": summary["kind"],
                "label": summary["label"], "k": k, "nodes": self.n_nodes, "communities": out_comms,
                "unassigned": unassigned, "shown_labels": self.stored_map}


def run_members(store: Store, run_id: int, *, community: int | None = None, limit: int | None = None,
                offset: int = 0) -> dict[str, Any]:
    """The nodes of each community of a finished run (or of one community), in canonical node order.

    A run made by an update shows its communities by their match in the previous version's run
    (``shown``; ``community`` stays the stored number) and ``community`` as an argument is then a shown
    label.

    ``limit``/``offset`` page each community's node list (``None``: all nodes);
    ``size`` is always the full count and ``truncated`` says whether nodes were
    left out. Nodes the run left unassigned (label -1, e.g. nodes missing from an
    attached file) are listed under ``unassigned``. Each node carries its
    stability (share of repeats keeping it in its community) when the run has one.
    """
    if limit is not None and limit < 0:
        raise UsageError(f"--limit must be 0 or more, got {limit}")
    if offset < 0:
        raise UsageError(f"--offset must be 0 or more, got {offset}")
    return RunMembers(store, run_id).page(community, limit, offset)


def compare_matrix(store: Store, run_ids: list[int], *, nodes: str = "common",
                   nmi_normalization: str = "arithmetic") -> dict[str, Any]:
    """ARI, NMI and VI of every pair of runs, as symmetric matrices in the order given.

    Each pair is aligned by node id as ``cutbook diff`` does: ``nodes="common"``
    scores the shared nodes; ``nodes="all"`` scores the union, a node missing
    from one side sitting in that side's extra group "absent". ``n_scored[i][j]``
    is the number of nodes scored for the pair. The diagonal is ARI = NMI = 1,
    VI = 0 (a run against itself).

    Formulas (see :mod:`workspace.compare.scores`): ARI of Hubert & Arabie
    (1985); NMI = I(U;V) / mean(H(U), H(V)) with the named mean (Strehl & Ghosh
    2002; Vinh, Epps & Bailey 2010); VI = H(U|V) + H(V|U) in nats and bits
    (Meilă 2007).
    """
    from workspace.compare import (
        ABSENT, NORMALIZATIONS, adjusted_rand_index, align_nodes, contingency_table, normalized_mutual_info,
        variation_of_information,
    )
    from workspace.errors import ComputeError

    if nodes not in ("common", "all"):
        raise UsageError("--nodes takes 'common' or 'all'")
    if nmi_normalization not in NORMALIZATIONS:
        raise ParameterError(f"--nmi takes one of {', '.join(NORMALIZATIONS)}")
    ids: list[int] = []
    for r in run_ids:
        if int(r) not in ids:
            ids.append(int(r))
    if len(ids) < 2:
        raise UsageError("a comparison matrix needs at least two different runs")
    if len(ids) > MAX_MATRIX_RUNS:
        raise UsageError(f"a comparison matrix takes at most {MAX_MATRIX_RUNS} runs, got {len(ids)}")
    # one read; a version's ids loaded once and shared, packed when every run is of one version
    # (10M nodes, three runs: each decoded to numpy strings before, 12.2 s and 5.5 GB)
    loaded = runs_service.load_memberships(store, ids)
    m = len(ids)
    ari = [[1.0 if i == j else None for j in range(m)] for i in range(m)]
    nmi = [[1.0 if i == j else None for j in range(m)] for i in range(m)]
    vi_n = [[0.0 if i == j else None for j in range(m)] for i in range(m)]
    vi_b = [[0.0 if i == j else None for j in range(m)] for i in range(m)]
    scored = [[int(loaded[i][1].shape[0]) if i == j else None for j in range(m)] for i in range(m)]
    for i in range(m):
        for j in range(i + 1, m):
            (ia, la, _), (ib, lb, _) = loaded[i], loaded[j]
            al = align_nodes(ia, ib)   # (one version: the same ids object, aligned without a look)
            if nodes == "common":
                if al.n_common == 0:
                    raise ComputeError(f"runs {ids[i]} and {ids[j]} share no node; use --nodes all")
                xa, xb = la[al.common_a], lb[al.common_b]
            else:
                xa = np.concatenate([la[al.common_a], la[al.only_a], np.full(al.only_b.shape[0], ABSENT)])
                xb = np.concatenate([lb[al.common_b], np.full(al.only_a.shape[0], ABSENT), lb[al.only_b]])
            t = contingency_table(xa, xb)
            a = adjusted_rand_index(table=t)
            n = normalized_mutual_info(table=t, normalization=nmi_normalization)
            vn, vb = variation_of_information(table=t)
            ari[i][j] = ari[j][i] = a
            nmi[i][j] = nmi[j][i] = n
            vi_n[i][j] = vi_n[j][i] = vn
            vi_b[i][j] = vi_b[j][i] = vb
            scored[i][j] = scored[j][i] = int(t.n)
    briefs = [{k: s[k] for k in ("run", "kind", "method", "label", "ref", "k")} for _, _, s in loaded]
    return {"runs": briefs, "nodes": nodes, "nmi_normalization": nmi_normalization, "ari": ari, "nmi": nmi,
            "vi_nats": vi_n, "vi_bits": vi_b, "n_scored": scored}
