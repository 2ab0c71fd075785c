"""Write ``river_towns.csv``: an invented network of 40 river towns (deterministic).

Run: ``python workspace/io/samples/make_river_towns.py [OUTPUT.csv]``.

Three invented river valleys of 14, 13 and 13 towns. Towns in the same valley
are linked with probability 0.45 and weekly boat trips 2..7; towns in
different valleys with probability 0.02 and 1 trip - a planted partition
(stochastic block model; Holland, Laskey & Leinhardt 1983). Each valley is
also closed into a ring so that it is connected, and the valleys are joined
by two portage links, so the whole network is connected. All names are made
up from nonsense syllables.

Columns: ``town_a,town_b,weight`` (weight = boat trips per week).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

SEED = 20240611
STEMS = ["Quor", "Vell", "Zint", "Pask", "Drou", "Mirl", "Tovv", "Yesk", "Brul", "Ferx"]
ENDINGS = ["ahaven", "ibeck", "ostead", "umby"]
VALLEY_SIZES = (14, 13, 13)


def town_names() -> list[str]:
    return [stem + ending for ending in ENDINGS for stem in STEMS]


def river_towns() -> tuple[list[tuple[str, str, int]], dict[str, int]]:
    """Edges (town_a, town_b, trips) and the planted valley of each town."""
    rng = np.random.default_rng(SEED)
    names = town_names()
    order = rng.permutation(len(names))
    valley = {}
    start = 0
    for k, size in enumerate(VALLEY_SIZES):
        for i in order[start:start + size]:
            valley[names[i]] = k
        start += size
    members = [[n for n in names if valley[n] == k] for k in range(len(VALLEY_SIZES))]
    pairs: dict[tuple[str, str], int] = {}
    for group in members:
        for i, a in enumerate(group):
            pairs[tuple(sorted((a, group[(i + 1) % len(group)])))] = int(rng.integers(2, 8))
    for i, a in enumerate(names):
        for b in names[i + 1:]:
            key = tuple(sorted((a, b)))
            if key in pairs:
                continue
            same = valley[a] == valley[b]
            if rng.random() < (0.45 if same else 0.02):
                pairs[key] = int(rng.integers(2, 8)) if same else 1
    pairs[tuple(sorted((members[0][0], members[1][0])))] = 1
    pairs[tuple(sorted((members[1][1], members[2][1])))] = 1
    edges = [(a, b, w) for (a, b), w in pairs.items()]
    shuffled = [edges[i] for i in rng.permutation(len(edges))]
    return shuffled, valley


def write(path: Path) -> None:
    edges, _ = river_towns()
    with open(path, "w", encoding="utf-8", newline="\n") as out:
        out.write("town_a,town_b,weight\n")
        out.writelines(f"{a},{b},{w}\n" for a, b, w in edges)


if __name__ == "__main__":
    write(Path(sys.argv[1]) if len(sys.argv) > 1 else Path(__file__).with_name("river_towns.csv"))
