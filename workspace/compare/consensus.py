"""Consensus of repeated partitions of the same nodes, with per-node stability.

Each repeat's communities are matched to a reference partition by maximum
overlap (Hungarian assignment on the contingency table; Kuhn 1955, via
``scipy.optimize.linear_sum_assignment``); each node then takes its most
frequent matched community (ties: the smallest community id). The matching is
redone once against that consensus, so the first repeat has no special weight.
Stability of node i = (number of repeats that put i in its consensus
community) / R — a per-node co-assignment score in the spirit of consensus
clustering (Strehl & Ghosh 2002; Lancichinetti & Fortunato 2012).
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import linear_sum_assignment

from workspace.errors import ComputeError


def _align(reference: np.ndarray, labels: np.ndarray, k_ref: int) -> np.ndarray:
    """Relabel ``labels`` onto ``reference`` ids by maximum overlap; unmatched ids get new ids >= k_ref."""
    k_lab = int(labels.max()) + 1
    table = np.bincount(reference * k_lab + labels, minlength=k_ref * k_lab).reshape(k_ref, k_lab)
    rows, cols = linear_sum_assignment(table, maximize=True)
    mapping = np.full(k_lab, -1, dtype=np.int64)
    mapping[cols] = rows
    unmatched = np.flatnonzero(mapping < 0)
    mapping[unmatched] = k_ref + np.arange(unmatched.shape[0])
    return mapping[labels]


def _vote(aligned: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    n = aligned[0].shape[0]
    k = max(int(a.max()) for a in aligned) + 1
    dtype = np.uint16 if len(aligned) < 65535 else np.uint32
    votes = np.zeros((n, k), dtype=dtype)
    rows = np.arange(n)
    for a in aligned:
        votes[rows, a] += 1
    winner = votes.argmax(axis=1)  # first maximum: ties go to the smallest id
    return winner.astype(np.int64), votes[rows, winner].astype(np.int64)


def consensus_membership(label_runs: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Consensus labels and, per node, how many repeats agree with them.

    Parameters
    ----------
    label_runs : list of int arrays, each shape (n,)
        Non-negative community labels of R repeated partitions of the same n nodes.

    Returns
    -------
    labels : int64 array, shape (n,)
        Consensus community of each node (not yet canonically renumbered).
    counts : int64 array, shape (n,)
        Number of repeats (1..R) whose matched community equals the consensus;
        ``counts / R`` is the node's stability.

    Raises
    ------
    ComputeError
        No runs, runs of different lengths, or negative labels.
    """
    if not label_runs:
        raise ComputeError("consensus needs at least one partition")
    runs = [np.asarray(r, dtype=np.int64) for r in label_runs]
    n = runs[0].shape[0]
    if any(r.shape != (n,) for r in runs) or any(r.size and r.min() < 0 for r in runs):
        raise ComputeError("consensus needs partitions of the same nodes with labels >= 0")
    reference = runs[0]
    for _ in range(2):
        k_ref = int(reference.max()) + 1
        aligned = [_align(reference, r, k_ref) for r in runs]
        reference, counts = _vote(aligned)
    return reference, counts
