"""Deterministic generators for the demo networks (pure numpy; no store access).

Velmora bike share
    Stations in seven invented districts on both banks of the river Sable.
    Monthly trip counts between stations form a weighted network, one version
    per month: March (baseline), April (more riders), May (the new Lantern
    Wharf district opens with its stations), June (Cinder Bridge closes for
    repairs, so trips across the river there collapse). July (``UPDATE_MONTH``) is the month the
    demo imports through the update loop: the bridge reopens and Lantern Wharf gets two more stations.

Orrin Hollow lab
    Co-working ties (shared projects) between coded staff ("S-014") of an
    invented lab with four research groups; one version per year.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SEED = 20260301

# district -> (bank, number of stations)
DISTRICTS = {
    "Old Quay": ("north", 14),
    "Millbrook": ("north", 12),
    "Quarry Hill": ("north", 11),
    "Tannery Row": ("north", 10),
    "Saltmarsh": ("south", 13),
    "Eastgate": ("south", 12),
    "Ferrow Park": ("south", 10),
}
NEW_DISTRICT = ("Lantern Wharf", "south", 9)
# neighbouring districts (more trips between them); Cinder Bridge joins Tannery Row and Ferrow Park
NEIGHBOURS = {("Old Quay", "Millbrook"), ("Millbrook", "Quarry Hill"), ("Quarry Hill", "Tannery Row"),
              ("Old Quay", "Tannery Row"), ("Saltmarsh", "Eastgate"), ("Eastgate", "Ferrow Park"),
              ("Saltmarsh", "Ferrow Park"), ("Old Quay", "Saltmarsh"), ("Tannery Row", "Ferrow Park"),
              ("Lantern Wharf", "Eastgate"), ("Lantern Wharf", "Saltmarsh")}
CINDER_BRIDGE = ("Tannery Row", "Ferrow Park")
MONTHS = ("2026-03", "2026-04", "2026-05", "2026-06")
#: the month imported last, through the update loop (tracked sets re-run, change report)
UPDATE_MONTH = "2026-07"


@dataclass(frozen=True)
class EdgeTable:
    """Rows of a weighted edge list: station a, station b, trips."""

    a: list[str]
    b: list[str]
    weight: list[int]

    def to_csv(self, path, header=("station_a", "station_b", "trips")) -> None:
        with open(path, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(",".join(header) + "\n")
            for x, y, w in zip(self.a, self.b, self.weight):
                fh.write(f"{x},{y},{w}\n")


CODES = {"Old Quay": "OQ", "Millbrook": "MB", "Quarry Hill": "QH", "Tannery Row": "TR", "Saltmarsh": "SM",
         "Eastgate": "EG", "Ferrow Park": "FP", "Lantern Wharf": "LW"}


def _code(district: str) -> str:
    return CODES[district]


def stations(month: str) -> dict[str, str]:
    """station id -> district, for the stations open in ``month``."""
    out = {}
    districts = dict(DISTRICTS)
    if month >= "2026-05":
        districts[NEW_DISTRICT[0]] = NEW_DISTRICT[1:]
    for name, (_bank, count) in districts.items():
        if name == NEW_DISTRICT[0] and month >= UPDATE_MONTH:
            count += 2  # two more Lantern Wharf stations open in July
        for i in range(1, count + 1):
            out[f"{_code(name)}-{i:02d}"] = name
    return out


def bike_trips(month: str) -> EdgeTable:
    """Trips between stations during ``month`` (deterministic)."""
    rng = np.random.default_rng([SEED, (*MONTHS, UPDATE_MONTH).index(month)])
    st = stations(month)
    ids = sorted(st)
    district = np.array([st[s] for s in ids])
    n = len(ids)
    growth = {"2026-03": 1.0, "2026-04": 1.25, "2026-05": 1.3, "2026-06": 1.3, UPDATE_MONTH: 1.35}[month]
    i, j = np.triu_indices(n, k=1)
    same = district[i] == district[j]
    pair = [tuple(sorted((district[a], district[b]))) for a, b in zip(i, j)]
    near = np.array([p in NEIGHBOURS or (p[1], p[0]) in NEIGHBOURS for p in pair])
    bridge = np.array([set(p) == set(CINDER_BRIDGE) for p in pair])
    # riders treat Tannery Row and Ferrow Park as one area while Cinder Bridge is open (closed in June only)
    open_bridge = bridge & (month != "2026-06")
    rate = np.where(same | open_bridge, 9.0, np.where(near, 0.9, 0.08)) * growth
    # a station pair gets a trip count only if riders use it at all this month
    used = rng.random(i.shape[0]) < np.where(same, 0.75, np.where(open_bridge, 0.6, np.where(near, 0.22, 0.03)))
    trips = rng.poisson(rate) * used
    keep = trips > 0
    return EdgeTable([ids[x] for x in i[keep]], [ids[y] for y in j[keep]], trips[keep].astype(int).tolist())


# district centres on the city's own grid, in km east and north of the old market; the river Sable runs
# west-east along north = 0, Cinder Bridge crosses it between Tannery Row and Ferrow Park
CENTRES = {"Old Quay": (-1.0, 1.2), "Millbrook": (-3.2, 2.6), "Quarry Hill": (0.2, 3.4),
           "Tannery Row": (2.4, 1.3), "Saltmarsh": (-2.4, -1.4), "Eastgate": (0.4, -2.3),
           "Ferrow Park": (2.8, -1.2), "Lantern Wharf": (-0.8, -3.8)}


def station_table(month: str) -> list[dict]:
    """One row per station open in ``month``: id, name, district, bank, position (km), docks, e-bikes.

    Positions scatter around the district's centre (deterministic per station, the same every month),
    kept on the district's bank of the river.
    """
    rows = []
    banks = {**{d: b for d, (b, _) in DISTRICTS.items()}, NEW_DISTRICT[0]: NEW_DISTRICT[1]}
    for station, district in sorted(stations(month).items()):
        number = int(station.rsplit("-", 1)[1])
        rng = np.random.default_rng([SEED, 7, list(CODES).index(district), number])
        cx, cy = CENTRES[district]
        x, y = cx + rng.normal(0, 0.45), cy + rng.normal(0, 0.35)
        y = max(y, 0.2) if banks[district] == "north" else min(y, -0.2)
        rows.append({"station": station, "name": f"{district} {number}", "district": district,
                     "bank": banks[district], "east_km": round(float(x), 3), "north_km": round(float(y), 3),
                     "docks": int(8 + rng.integers(0, 17)), "ebikes": bool(rng.random() < 0.4)})
    return rows


def station_table_csv(month: str, path) -> None:
    """:func:`station_table` as a CSV keyed by ``station`` (booleans written yes/no)."""
    rows = station_table(month)
    columns = list(rows[0])
    with open(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(",".join(["node"] + columns[1:]) + "\n")
        for r in rows:
            fh.write(",".join(("yes" if r[c] else "no") if isinstance(r[c], bool) else str(r[c])
                              for c in columns) + "\n")


def district_grouping(month: str) -> list[tuple[str, str]]:
    """The city's own planning districts as a (station, district) grouping."""
    return sorted(stations(month).items())


GROUPS = {"Soil Chemistry": 11, "Sensor Design": 9, "Field Ecology": 12, "Data Methods": 8}


def lab_staff(year: int) -> dict[str, str]:
    out = {}
    k = 1
    for group, size in GROUPS.items():
        extra = 2 if (year >= 2026 and group == "Data Methods") else 0
        for _ in range(size + extra):
            out[f"S-{k:03d}"] = group
            k += 1
    return out


def lab_ties(year: int) -> EdgeTable:
    """Shared-project counts between staff in ``year`` (deterministic)."""
    rng = np.random.default_rng([SEED, year])
    staff = lab_staff(year)
    ids = sorted(staff)
    group = np.array([staff[s] for s in ids])
    i, j = np.triu_indices(len(ids), k=1)
    same = group[i] == group[j]
    bridge_groups = {("Data Methods", "Field Ecology"), ("Data Methods", "Soil Chemistry")}
    cross = np.array([(group[a], group[b]) in bridge_groups or (group[b], group[a]) in bridge_groups
                      for a, b in zip(i, j)])
    p = np.where(same, 0.55, np.where(cross, 0.12 if year >= 2026 else 0.05, 0.02))
    tie = rng.random(i.shape[0]) < p
    projects = 1 + rng.poisson(np.where(same, 1.5, 0.3))
    return EdgeTable([ids[x] for x in i[tie]], [ids[y] for y in j[tie]], projects[tie].astype(int).tolist())
