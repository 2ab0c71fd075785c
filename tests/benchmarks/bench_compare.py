"""Benchmark: numerics of a full membership diff at one million nodes.

Run with ``python tests/benchmarks/bench_compare.py [n_nodes]``. Two
memberships of about k = 20 communities (unequal sizes) over node sets that
differ in 1 % of their ids; B renames A's communities and moves 10 % of the
shared nodes. Prints the time of each stage (best of ``REPEAT`` runs), the
end-to-end ``compare_memberships`` time, the time of building the JSON-ready
dict, and the time scikit-learn takes for ARI + NMI + AMI on the same labels
as the reference ratio (measured in the same run). The store load is not
included (added by the services layer).
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from workspace.compare import align_nodes, community_events, compare_memberships  # noqa: E402
from workspace.compare.contingency import _factorize_labels, _table_from_codes  # noqa: E402
from workspace.compare.matching import _match_positions  # noqa: E402
from workspace.compare.scores import (  # noqa: E402
    _adjusted_rand_index, _expected_mutual_information, _normalized_mutual_info,
    _variation_of_information,
)

REPEAT = 3
K = 20


def make_memberships(n: int, seed: int = 7):
    rng = np.random.default_rng(seed)
    n_diff = n // 100
    universe = np.char.add("node", np.char.zfill(np.arange(n + n_diff).astype(str), 8))
    universe.sort()
    drop_a = rng.choice(n + n_diff, n_diff, replace=False)
    keep_a = np.ones(n + n_diff, bool)
    keep_a[drop_a] = False
    # B drops another 1 % of A's ids and gains the ones A lacks.
    drop_b = rng.choice(np.flatnonzero(keep_a), n_diff, replace=False)
    keep_b = np.ones(n + n_diff, bool)
    keep_b[drop_b] = False
    ids_a, ids_b = universe[keep_a], universe[keep_b]
    weights = rng.dirichlet(np.full(K, 3.0))
    lab_u = rng.choice(K, n + n_diff, p=weights).astype(np.int64)
    rename = rng.permutation(K)
    lab_b_u = rename[lab_u]
    moved = rng.random(n + n_diff) < 0.10
    lab_b_u[moved] = (lab_b_u[moved] + rng.integers(1, K, moved.sum())) % K
    return ids_a, lab_u[keep_a], ids_b, lab_b_u[keep_b]


def best(fn, repeat=REPEAT):
    out, times = None, []
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
    t0 = time.perf_counter()
    ids_a, la, ids_b, lb = make_memberships(n)
    print(f"setup: n_a={ids_a.shape[0]:,} n_b={ids_b.shape[0]:,} k={K} "
          f"({time.perf_counter() - t0:.2f} s to generate)")

    stages: list[tuple[str, float]] = []
    t, al = best(lambda: align_nodes(ids_a, ids_b))
    stages.append(("align node ids", t))
    a_c, b_c = la[al.common_a], lb[al.common_b]

    def build():
        va, ca, _ = _factorize_labels(a_c)
        vb, cb, _ = _factorize_labels(b_c)
        return _table_from_codes(va, ca, vb, cb)
    t, table = best(build)
    stages.append(("contingency table", t))
    t, _ = best(lambda: _adjusted_rand_index(table))
    stages.append(("ARI", t))
    t, _ = best(lambda: _normalized_mutual_info(table, "arithmetic"))
    stages.append(("MI + entropies + NMI", t))
    t, _ = best(lambda: _expected_mutual_information(table))
    stages.append(("expected MI (for AMI)", t))
    t, _ = best(lambda: _variation_of_information(table))
    stages.append(("VI", t))
    t, mp = best(lambda: _match_positions(table))
    stages.append(("Hungarian matching", t))
    t, _ = best(lambda: community_events(table))
    stages.append(("events", t))

    def moved():
        match_of_row = np.full(table.shape[0], -1)
        match_of_row[mp[0]] = mp[1]
        _, ca, _ = _factorize_labels(a_c)
        _, cb, _ = _factorize_labels(b_c)
        return np.flatnonzero(match_of_row[ca] != cb)
    t, _ = best(moved)
    stages.append(("moved nodes", t))

    print("\nstage breakdown (best of %d):" % REPEAT)
    for name, s in stages:
        print(f"  {name:<24s} {s * 1000:8.1f} ms")
    print(f"  {'sum of stages':<24s} {sum(s for _, s in stages) * 1000:8.1f} ms")

    t_full, diff = best(lambda: compare_memberships(ids_a, la, ids_b, lb))
    t_all, _ = best(lambda: compare_memberships(ids_a, la, ids_b, lb, nodes="all"))
    t_dict, d = best(lambda: diff.to_dict())
    t_json, text = best(lambda: json.dumps(d))
    print(f"\ncompare_memberships(nodes='common') end to end: {t_full * 1000:8.1f} ms")
    print(f"compare_memberships(nodes='all')    end to end: {t_all * 1000:8.1f} ms")
    print(f"to_dict() ({diff.moved:,} moved nodes listed):   {t_dict * 1000:8.1f} ms")
    print(f"json.dumps ({len(text) / 1e6:.1f} MB):                 {t_json * 1000:8.1f} ms")
    print(f"numerics total (compare + to_dict):        {(t_full + t_dict) * 1000:8.1f} ms "
          f"(target < 1000 ms)")
    print(f"\nresult: ARI={diff.ari:.6f} NMI={diff.nmi:.6f} AMI={diff.ami:.6f} "
          f"VI={diff.vi_nats:.6f} nats, moved={diff.moved:,} "
          f"({diff.moved / diff.n_common:.1%} of shared), only_in_a={diff.only_in_a:,}, "
          f"only_in_b={diff.only_in_b:,}, coverage={diff.coverage:.4f}, "
          f"matches={len(diff.matches)}, events={len(diff.events)}")

    try:
        from sklearn.metrics import (
            adjusted_mutual_info_score, adjusted_rand_score, normalized_mutual_info_score,
        )
    except ImportError:  # pragma: no cover - reference is optional
        print("scikit-learn not installed: no reference ratio")
        return
    t_sk = {}
    t_sk["ARI"], sk_ari = best(lambda: adjusted_rand_score(a_c, b_c), 1)
    t_sk["NMI"], sk_nmi = best(lambda: normalized_mutual_info_score(a_c, b_c), 1)
    t_sk["AMI"], sk_ami = best(lambda: adjusted_mutual_info_score(a_c, b_c), 1)
    sk_total = sum(t_sk.values())
    ours = stages[1][1] + stages[2][1] + stages[3][1] + stages[4][1]
    print("\nreference: scikit-learn on the same shared-node labels")
    for k, v in t_sk.items():
        print(f"  sklearn {k:<4s} {v * 1000:8.1f} ms")
    print(f"  sklearn ARI+NMI+AMI   {sk_total * 1000:8.1f} ms")
    print(f"  ours table+ARI+NMI+AMI {ours * 1000:7.1f} ms  -> {sk_total / ours:.1f}x faster")
    print(f"  ours full diff         {t_full * 1000:7.1f} ms  -> "
          f"ratio full diff / sklearn scores = {t_full / sk_total:.2f}")
    print(f"  |ARI diff| {abs(diff.ari - sk_ari):.1e}  |NMI diff| {abs(diff.nmi - sk_nmi):.1e}  "
          f"|AMI diff| {abs(diff.ami - sk_ami):.1e}")


if __name__ == "__main__":
    main()
