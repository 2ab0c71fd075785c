"""Build the demo workspace through the service layer (the same path a user's commands take)."""

from __future__ import annotations

import tempfile
from pathlib import Path
from typing import Callable

from workspace.domain import ImportPolicy
from workspace.services import networks, params, runs, sweeps, tracking
from workspace.store.db import Store

from . import scenario

CITY = "velmora-bikes"
LAB = "orrin-hollow-lab"


def build_demo(store: Store, *, say: Callable[[str], None] = lambda s: None) -> dict:
    """Fill ``store`` with the demo projects, versions, parameter sets and runs.

    Returns a summary (counts and the ids of the notable runs).
    """
    summary: dict = {"projects": [CITY, LAB], "runs": {}}
    policy = ImportPolicy(weight="trips", duplicates="sum")
    with tempfile.TemporaryDirectory(prefix="cutbook-demo-") as tmp:
        tmp = Path(tmp)
        for month in scenario.MONTHS:
            f = tmp / f"trips-{month}.csv"
            scenario.bike_trips(month).to_csv(f)
            note = {"2026-03": "March trips (baseline)", "2026-04": "April trips: spring ridership",
                    "2026-05": "May trips: Lantern Wharf district opens",
                    "2026-06": "June trips: Cinder Bridge closed for repairs"}[month]
            # each month's station table travels with its version: names, districts, positions on the city grid
            table = tmp / f"stations-{month}.csv"
            scenario.station_table_csv(month, table)
            prepared = networks.prepare_import(f, policy=policy, source_label=f.name, nodes=table,
                                               coords=("east_km", "north_km"))
            res = networks.import_network(store, f, project=CITY, network="stations", policy=policy, message=note,
                                          source_label=f.name, prepared=prepared)
            say(f"imported {res.ref}: {res.nodes} stations, {res.edges} station pairs — {note}")
        for year in (2025, 2026):
            f = tmp / f"ties-{year}.csv"
            scenario.lab_ties(year).to_csv(f, header=("person_a", "person_b", "projects"))
            res = networks.import_network(store, f, project=LAB, network="co-working",
                                          policy=ImportPolicy(weight="projects", duplicates="sum"),
                                          message=f"shared projects in {year}", source_label=f.name)
            say(f"imported {res.ref}: {res.nodes} staff, {res.edges} ties")

        # k chosen by the eigengap on each month's network
        p_auto = params.save_params(store, f"{CITY}/districts", method="njw", k="auto")
        # a second version of the same set: the eight districts the city plans with
        p_eight = params.save_params(store, f"{CITY}/districts", method="njw", k=8)
        p_split = params.save_params(store, f"{CITY}/two-banks", method="fiedler",
                                     values={"laplacian": "sym", "split": "sweep"})
        p_mod = params.save_params(store, f"{CITY}/modularity-split", method="leading-eigenvector", k="auto")
        p_lab = params.save_params(store, f"{LAB}/groups", method="shi-malik", k=4)
        say("saved parameter sets: " + ", ".join(p["ref"] for p in (p_auto, p_eight, p_split, p_mod, p_lab)))

        def run(ref, **kw):
            spec = runs.prepare_run(store, ref, **kw)
            out = runs.launch(store, spec)
            say(f"run {out['run']}: {out['method']} on {out['ref']} -> k={out['k']}")
            return out["run"]

        ids = summary["runs"]
        for v in range(1, len(scenario.MONTHS) + 1):
            ids[f"districts@{v}"] = run(f"{CITY}/stations@{v}", params_ref=f"{CITY}/districts@1")
        ids["two-banks@1"] = run(f"{CITY}/stations@1", params_ref=f"{CITY}/two-banks")
        ids["two-banks@4"] = run(f"{CITY}/stations@4", params_ref=f"{CITY}/two-banks")
        ids["modularity@4"] = run(f"{CITY}/stations@4", params_ref=f"{CITY}/modularity-split")
        ids["louvain@4"] = run(f"{CITY}/stations@4", method="louvain")
        ids["stability@4"] = run(f"{CITY}/stations@4", params_ref=f"{CITY}/districts@2", repeats=12)
        grouping = tmp / "planning-districts.csv"
        with open(grouping, "w", encoding="utf-8") as fh:
            fh.write("node,community\n")
            for station, district in scenario.district_grouping(scenario.MONTHS[-1]):
                fh.write(f"{station},{district}\n")
        att = runs.attach(store, grouping, f"{CITY}/stations@4", label="planning-districts")
        ids["planning-districts@4"] = att["run"]
        say(f"run {att['run']}: attached the city's planning districts to {att['ref']}")
        for v in (1, 2):
            ids[f"lab-groups@{v}"] = run(f"{LAB}/co-working@{v}", params_ref=f"{LAB}/groups")
        ids["lab-greedy@2"] = run(f"{LAB}/co-working@2", method="greedy-modularity")

        # how many riding areas does June's network hold, and is that grouping real? k = 2..10, 5 seeds
        sw = sweeps.sweep(store, sweeps.prepare_sweep(store, f"{CITY}/stations@4", method="njw", ks="2..10",
                                                      seeds=5))
        summary["sweeps"] = {"riding-areas@4": sw["sweep"]}
        for point in sw["points"]:
            for repeat, run_id in enumerate(point["runs"]):
                ids[f"riding-areas k={point['k']} repeat {repeat}@4"] = run_id
        say(f"sweep {sw['sweep']}: njw k=2..10 x 5 seeds on {sw['ref']} ({sw['tasks']['done']} runs) -> "
            f"recommended k={sw['recommended_k']}")

        # the update loop: the eigengap districts are tracked, so importing July's trips re-runs them on
        # the new version and reports what changed since June (Cinder Bridge reopens)
        tracking.add_tracked(store, f"{CITY}/stations", f"{CITY}/districts@1")
        say(f"tracking {CITY}/districts@1 on {CITY}/stations")
        f = tmp / f"trips-{scenario.UPDATE_MONTH}.csv"
        scenario.bike_trips(scenario.UPDATE_MONTH).to_csv(f)
        note = "July trips: Cinder Bridge reopens, two more Lantern Wharf stations"
        table = tmp / f"stations-{scenario.UPDATE_MONTH}.csv"
        scenario.station_table_csv(scenario.UPDATE_MONTH, table)  # July's own table: the two new stations named
        prepared = networks.prepare_import(f, policy=policy, source_label=f.name, nodes=table,
                                           coords=("east_km", "north_km"))
        res = networks.import_network(store, f, project=CITY, network="stations", policy=policy, message=note,
                                      source_label=f.name, prepared=prepared)
        say(f"imported {res.ref}: {res.nodes} stations, {res.edges} station pairs — {note}")
        upd = tracking.update_after_import(store, res, say=say)
        summary["updates"] = {"july": upd["update"]}
        for st in upd["sets"]:
            ids[f"districts@{res.version}"] = st["run"]
            sm = st["summary"] or {}
            say(f"update {upd['update']}: {st['params']} run {st['run']} against run {st['previous_run']}: "
                f"ARI {sm.get('ari', float('nan')):.4g}, moved {sm.get('moved')}, "
                f"+{sm.get('nodes_added')}/-{sm.get('nodes_removed')} stations, events "
                + ", ".join(f"{n} {k}" for k, n in (sm.get("events") or {}).items()))
    return summary
