"""Argument parsing for every ``cutbook`` command (no heavy imports here)."""

from __future__ import annotations

import argparse

EPILOG = """\
references: project/network[@version] (latest version when @version is left out).
store: --store PATH|URL, else $CUTBOOK_STORE, else a file in your user data folder.
exit codes: 0 ok, 1 failure, 2 usage, 3 not found, 4 conflict or lock (store busy), 10 no store there,
11 store read-only, 12 no space left, 13 not a cutbook store or damaged, 14 permission denied, 130 cancelled.
Every command takes --json: one JSON document on stdout, human text on stderr."""


def _executor_options(p) -> None:
    """Where a sweep's tasks compute (workspace/jobs/executors.py)."""
    p.add_argument("--executor", choices=["local", "dask"], default=None,
                   help="local: threads of this process (default); dask: a Dask cluster (--scheduler, "
                        "$CUTBOOK_SCHEDULER, or --workers N processes started on this machine)")
    p.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="an existing Dask scheduler, e.g. tcp://host:8786 (default: $CUTBOOK_SCHEDULER); "
                        "implies --executor dask")


def _common() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    p.add_argument("--store", default=argparse.SUPPRESS, metavar="PATH|URL",
                   help="store to use (SQLite path or SQLAlchemy URL)")
    p.add_argument("--json", action="store_true", help="print one JSON document on stdout")
    p.add_argument("--user", default=argparse.SUPPRESS, metavar="NAME",
                   help="who makes the records this command writes (default: $CUTBOOK_USER, else the OS account)")
    return p


def _handler(module: str, name: str):
    def run(args):
        import importlib

        return getattr(importlib.import_module(f"workspace.cli.{module}"), name)(args)
    return run


def build_parser() -> argparse.ArgumentParser:
    common = _common()
    parser = argparse.ArgumentParser(
        prog="cutbook", description="Versioned workspace for spectral network partitioning.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--store", default=None, metavar="PATH|URL",
                        help="store to use (SQLite path or SQLAlchemy URL)")
    parser.add_argument("--version", action="version", version="cutbook 0.1.0")
    sub = parser.add_subparsers(title="commands", metavar="COMMAND")

    def add(name, help_, module, func):
        p = sub.add_parser(name, help=help_, description=help_, parents=[common])
        p.set_defaults(handler=_handler(module, func))
        return p

    # --- networks --------------------------------------------------------------------
    p = add("import", "import a network file as a new version", "networks", "cmd_import")
    p.add_argument("file", help="edge list (CSV/TSV/whitespace), GraphML, Matrix Market or node-link JSON")
    p.add_argument("--project", required=True, help="project name (created if new)")
    p.add_argument("--network", required=True, help="network name (created if new)")
    p.add_argument("--format", choices=["csv", "tsv", "edgelist", "graphml", "mtx", "json"],
                   help="file format (default: by extension)")
    p.add_argument("-m", "--message", default="", help="a note kept with the version")
    g = p.add_argument_group("import policies (each recorded on the version)")
    g.add_argument("--duplicates", choices=["sum", "max", "first", "error"], default="max",
                   help="repeated pairs, reversed pairs included (default: max)")
    g.add_argument("--self-loops", choices=["drop", "keep", "error"], default="drop",
                   help="edges from a node to itself (default: drop)")
    g.add_argument("--directed", choices=["error", "sum", "max", "min", "mean", "keep"], default="error",
                   help="rule that makes directed input undirected; 'error' refuses asymmetric input; "
                        "'keep' keeps direction (rows are arcs source -> target)")
    g.add_argument("--weight", metavar="COLUMN",
                   help="weight column by name or 0-based index (default: unweighted, weight 1)")
    g.add_argument("--numeric-ids", action="store_true", help="read node ids as integers ('007' -> '7')")
    g.add_argument("--comment", metavar="CHAR", help="comment character (default: none)")
    g.add_argument("--delimiter", metavar="SEP", help="field separator: ',', 'tab', 'whitespace', ...")
    g.add_argument("--header", choices=["auto", "yes", "no"], default="auto",
                   help="first line names the columns (default: auto - yes when it reads like "
                        "source,target / from,to / u,v ... or cannot be data; the choice is "
                        "printed, with a WARNING when it looks like a header read as an edge)")
    g = p.add_argument_group("node attributes (stored with the version; see also `cutbook nodes`)")
    g.add_argument("--nodes", metavar="FILE",
                   help="node table: CSV with a 'node' (or 'id') column, GraphML node data or node-link JSON "
                        "(default: a GraphML/JSON network's own node data; else the previous version's table)")
    g.add_argument("--nodes-format", choices=["csv", "graphml", "json"], help="node table format (default: by extension)")
    g.add_argument("--coords", metavar="X,Y", help="two number columns holding node positions: x,y or lat,lon "
                                                  "(drawn by `cutbook report`)")

    p.add_argument("--no-track", dest="track", action="store_false",
                   help="do not run the network's tracked parameter sets on the new version")

    add("projects", "list projects", "networks", "cmd_projects")
    p = add("networks", "list networks", "networks", "cmd_networks")
    p.add_argument("--project", help="only this project")
    p = add("versions", "list the versions of a network", "networks", "cmd_versions")
    p.add_argument("network", metavar="PROJECT/NETWORK")
    p = add("show", "show a network version (project/network[@V]) or a run (its id)", "networks", "cmd_show")
    p.add_argument("target", metavar="REF|RUN")
    p.add_argument("--limit", type=int, default=20, help="how many changed items to list (default 20)")
    p.add_argument("--changes", action="store_true",
                   help="a version: compare it with its parent at any size (by default only up to "
                        "20M edges in the two)")
    p.add_argument("--label-by", metavar="ATTRIBUTE",
                   help="a run: list each community's first members by this node attribute")
    p = add("changes", "structural changes between two versions", "networks", "cmd_changes")
    p.add_argument("a", metavar="P/N@A")
    p.add_argument("b", metavar="P/N@B")
    p.add_argument("--limit", type=int, default=None, help="list at most this many items per kind")

    # --- node attribute tables (workspace/cli/nodes.py) -----------------------------------
    p = add("nodes", "node attribute tables of network versions: add one (as the next version), show, values",
            "nodes", "cmd_nodes")
    nsub = p.add_subparsers(dest="nodes_action", metavar="ACTION", required=True)
    q = nsub.add_parser("add", help="add or replace the node table: the next version, same graph arrays",
                        parents=[common])
    q.add_argument("ref", metavar="PROJECT/NETWORK[@V]", help="whose graph the new version keeps (default latest)")
    q.add_argument("file", help="CSV with a 'node' (or 'id') column, GraphML node data or node-link JSON")
    q.add_argument("--nodes-format", choices=["csv", "graphml", "json"], help="default: by extension")
    q.add_argument("--coords", metavar="X,Y", help="two number columns holding positions: x,y or lat,lon")
    q.add_argument("-m", "--message", default="", help="a note kept with the version")
    q = nsub.add_parser("show", help="the attributes of a version's node table", parents=[common])
    q.add_argument("ref", metavar="PROJECT/NETWORK[@V]")
    q = nsub.add_parser("values", help="every node's value of one attribute", parents=[common])
    q.add_argument("ref", metavar="PROJECT/NETWORK[@V]")
    q.add_argument("attribute")
    q.add_argument("--limit", type=int, default=50, help="text output: nodes listed (default 50; --json lists all)")

    # --- parameter sets ----------------------------------------------------------------
    p = add("params", "save, list and show named parameter sets", "params", "cmd_params")
    psub = p.add_subparsers(dest="params_action", metavar="ACTION", required=True)
    q = psub.add_parser("save", help="save values as a parameter set (a new version if they differ)",
                        parents=[common])
    q.add_argument("name", metavar="PROJECT/NAME")
    q.add_argument("--method", required=True, help="method id (see `cutbook methods`)")
    q.add_argument("--k", help="number of communities, or 'auto' where the method can choose")
    q.add_argument("--set", action="append", default=[], metavar="KEY=VALUE", help="a method parameter")
    q = psub.add_parser("list", help="list parameter sets", parents=[common])
    q.add_argument("project", nargs="?")
    q = psub.add_parser("show", help="show a parameter set version", parents=[common])
    q.add_argument("name", metavar="PROJECT/NAME[@V]")

    p = add("methods", "list partition methods and their parameters", "params", "cmd_methods")
    p.add_argument("method", nargs="?", help="show one method in full")

    # --- runs --------------------------------------------------------------------------
    p = add("run", "partition a network version", "runs", "cmd_run")
    p.add_argument("ref", metavar="PROJECT/NETWORK[@V]")
    how = p.add_mutually_exclusive_group(required=True)
    how.add_argument("--params", metavar="PROJECT/NAME[@V]", help="a saved parameter set")
    how.add_argument("--method", help="method id (see `cutbook methods`)")
    p.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                   help="a method parameter (overrides the parameter set's value)")
    p.add_argument("--k", help="number of communities, or 'auto'")
    p.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    p.add_argument("--repeats", type=int, default=1,
                   help="repeat with seeds seed..seed+N-1 for a consensus and per-node stability")
    p.add_argument("--perturb", type=float, default=None,
                   help="with --repeats: sd of the random factor (mean 1) on each edge weight per repeat (default 0.5; "
                        "0 = vary the seed only)")
    p.add_argument("--warm", default="off", metavar="auto|off|RUN",
                   help="start the eigensolver from the previous version's cached embedding or run of the same "
                        "parameters (auto), from a given run's membership (RUN), or from scratch (off, default); "
                        "njw, shi-malik, regularized and bethe only")

    p = add("rerun", "repeat a run from its record and check the membership is identical", "runs", "cmd_rerun")
    p.add_argument("run", type=int)

    p = add("attach", "store a partition from a membership file (CSV, JSON or GraphML) as a run", "runs",
            "cmd_attach")
    p.add_argument("file", help="CSV with columns node,community; .json node-link or .graphml with a 'community' "
                                "attribute on each node")
    p.add_argument("--to", required=True, metavar="PROJECT/NETWORK[@V]")
    p.add_argument("--label", required=True, help="what this grouping is, e.g. 'field-survey'")
    p.add_argument("--format", choices=["csv", "json", "graphml"],
                   help="membership file format (default: by extension; .tsv and .txt are CSV)")
    p.add_argument("--delimiter", metavar="SEP", help="CSV field separator: ',' (default), ';', 'tab', '|', ...")

    p = add("runs", "list runs, newest first", "runs", "cmd_runs")
    p.add_argument("ref", nargs="?", metavar="PROJECT[/NETWORK[@V]]")
    p.add_argument("--status", choices=["running", "done", "failed", "cancelled", "interrupted"])
    p.add_argument("--limit", type=int, default=None)
    p.add_argument("--sort", default="run", metavar="KEY",
                   help="run, started, status, method, version, k, param_set, or a quality measure: modularity, "
                        "conductance, normalized_cut, ratio_cut, coverage, cut (default run, newest first)")
    order = p.add_mutually_exclusive_group()
    order.add_argument("--asc", dest="descending", action="store_false", default=None,
                       help="ascending order (default: largest first for run/started/k/modularity/coverage)")
    order.add_argument("--desc", dest="descending", action="store_true", help="descending order")
    p.add_argument("--filter", metavar="TEXT",
                   help="only runs whose method, label, version, status or parameter set contains every word")

    p = add("export", "write a run's membership (csv), or the network with it (json node-link, graphml)",
            "runs", "cmd_export")
    p.add_argument("run", type=int)
    p.add_argument("--format", choices=["csv", "json", "graphml"], default="csv",
                   help="csv: node,community; json/graphml: nodes, edges, weights and each node's community")
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="output file; '-' for standard output")
    p.add_argument("--align-to", type=int, metavar="RUN",
                   help="number the communities by their match in RUN (its shown labels; unmatched ones get fresh "
                        "numbers)")

    p = add("where", "a node's community in every run of every version (of every network unless --network)",
            "runs", "cmd_where")
    p.add_argument("node")
    p.add_argument("--network", metavar="PROJECT/NETWORK", help="search this network only (default: every network)")
    p.add_argument("--label-by", metavar="ATTRIBUTE", help="show nodes by this node attribute (stored node table)")

    # --- sweeps (workspace/cli/sweeps.py) ------------------------------------------------
    p = add("sweep", "runs over a range of k, a parameter's values and seeds, with a recommendation",
            "sweeps", "cmd_sweep")
    p.add_argument("ref", metavar="PROJECT/NETWORK[@V]")
    how = p.add_mutually_exclusive_group(required=True)
    how.add_argument("--params", metavar="PROJECT/NAME[@V]", help="a saved parameter set")
    how.add_argument("--method", help="method id (see `cutbook methods`)")
    p.add_argument("--set", action="append", default=[], metavar="KEY=VALUE", help="a method parameter")
    p.add_argument("--k", metavar="RANGE", help="k values: 2..16, 2,3,5,8 or a mix like 2..4,8")
    p.add_argument("--vary", metavar="NAME=V1,V2,...", help="one method parameter over several values")
    p.add_argument("--seeds", type=int, default=1, help="repeats per k with seeds seed..seed+N-1 (default 1)")
    p.add_argument("--seed", type=int, default=0, help="first seed (default 0)")
    p.add_argument("--perturb", type=float, default=None,
                   help="with --seeds N>1: sd of the random factor (mean 1) on each edge weight in repeats "
                        "after the first (default 0.5; 0 = vary the seed only)")
    p.add_argument("--workers", type=int, default=None,
                   help="k assigned at a time from one embedding (default: CPUs, at most 4); with --executor dask "
                        "the worker processes of a Dask cluster started on this machine; results do not depend on it")
    _executor_options(p)
    p = add("sweeps", "list (the default), show, extend, diff and delete sweeps", "sweeps", "cmd_sweeps")
    # no ACTION lists them, as `runs` and `projects` do
    ssub = p.add_subparsers(dest="sweeps_action", metavar="ACTION", required=False)
    p.set_defaults(ref=None)
    q = ssub.add_parser("list", help="list sweeps, newest first", parents=[common])
    q.add_argument("ref", nargs="?", metavar="PROJECT[/NETWORK[@V]]")
    q = ssub.add_parser("show", help="a sweep's measures per k, recommendation and split view", parents=[common])
    q.add_argument("sweep", type=int)
    q.add_argument("--split", metavar="K1:K2", help="split view between these two k (default: consecutive k)")
    q = ssub.add_parser("extend", help="add k or seeds (or resume a cancelled sweep) without recomputing",
                        parents=[common])
    q.add_argument("sweep", type=int)
    q.add_argument("--k", metavar="RANGE", help="further k values")
    q.add_argument("--seeds", type=int, help="new total number of seeds (not fewer than now)")
    q.add_argument("--workers", type=int, default=None, help="k assigned at a time (default: CPUs, at most 4); "
                   "with --executor dask the worker processes of a Dask cluster started on this machine")
    _executor_options(q)
    q = ssub.add_parser("diff", help="two sweeps side by side", parents=[common])
    q.add_argument("a", type=int)
    q.add_argument("b", type=int)
    q = ssub.add_parser("delete", help="remove a sweep's record (its runs are kept)", parents=[common])
    q.add_argument("sweep", type=int)
    p = add("embeddings", "report the cached spectral embeddings, or prune them", "sweeps", "cmd_embeddings")
    p.add_argument("ref", nargs="?", metavar="PROJECT/NETWORK[@V]", help="only this network or version")
    p.add_argument("--prune", action="store_true", help="remove them (runs stay reproducible: rerun re-solves)")

    # --- reports (workspace/cli/report.py) -------------------------------------------
    p = add("report", "an HTML report of a run, the diff of two runs, a sweep, or a chain of runs across "
            "versions; or one of its figures as SVG/PNG", "report", "cmd_report")
    p.add_argument("runs", nargs="*", type=int, metavar="RUN",
                   help="one run, two runs (A B) to compare, or with --chain two or more runs in order")
    p.add_argument("--sweep", type=int, metavar="ID", help="a sweep report: quality and stability against k")
    p.add_argument("--chain", action="store_true",
                   help="a chain report of the runs given (a flow chart of communities across them)")
    p.add_argument("--params", metavar="PROJECT/NAME[@V]",
                   help="a chain report of this parameter-set version's runs across a network's versions "
                        "(default version: the one its newest run used)")
    p.add_argument("--network", metavar="PROJECT/NETWORK", help="with --params: which network")
    p.add_argument("--label-by", metavar="ATTRIBUTE",
                   help="name nodes by this node attribute: in small network drawings (run) and moved nodes (diff)")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="FILE.html (the page), FILE.svg or FILE.png (with --figure); '-' for standard output")
    p.add_argument("--figure", metavar="NAME",
                   help="write one figure alone: spectrum, sizes, stability, composition, network (run); "
                        "contingency (diff); quality, stability (sweep); flow (chain)")
    p.add_argument("--format", choices=["html", "svg", "png"], help="output format (default: by extension)")
    p.add_argument("--moved", type=int, default=None, metavar="N",
                   help="diff report: moved nodes listed (default 50; the rest are counted)")
    p.add_argument("--by", metavar="ATTRIBUTE",
                   help="run report: add the communities' composition by this node attribute (stored table)")
    p.add_argument("--nodes", metavar="FILE",
                   help="run report, with --by: read the attribute from this node table file instead")

    p = add("composition", "a run's communities by a node attribute of its version's node table, or of a "
            "node table file (counts, shares, dominant value; ARI/NMI agreement)", "report", "cmd_composition")
    p.add_argument("run", type=int)
    p.add_argument("--nodes", metavar="FILE",
                   help="read the attribute from this node table file instead of the stored one: CSV with a "
                        "'node' (or 'id') column, GraphML node data, or node-link JSON")
    p.add_argument("--by", required=True, metavar="ATTRIBUTE", help="the attribute (column) to group by")
    p.add_argument("--nodes-format", choices=["csv", "graphml", "json"], help="node table format (default: by extension)")
    p.add_argument("--nmi", choices=["arithmetic", "geometric", "max", "min"], default="arithmetic",
                   help="NMI normalisation (default arithmetic)")

    # --- comparing -------------------------------------------------------------------
    p = add("diff", "compare the memberships of two runs, or follow a chain of runs", "diffs", "cmd_diff")
    p.add_argument("runs", nargs="*", type=int, metavar="RUN", help="two runs (or, with --track, a chain)")
    p.add_argument("--track", nargs="?", const="", default=None, metavar="PROJECT/PARAMS",
                   help="follow a chain: --track RUN RUN …, or the latest run of a parameter set on each version")
    p.add_argument("--network", metavar="PROJECT/NETWORK", help="with --track PARAMS: which network")
    p.add_argument("--nodes", choices=["common", "all"], default="common",
                   help="score shared nodes only (default) or give absent nodes an 'absent' community")
    p.add_argument("--nmi", choices=["arithmetic", "geometric", "max", "min"], default="arithmetic",
                   help="NMI normalisation (default arithmetic)")
    p.add_argument("--limit", type=int, default=20,
                   help="rows per section in text output: matches, events, cells, moved nodes (JSON lists all)")
    p.add_argument("--dense-table", action="store_true",
                   help="with --json: add the contingency as a dense 'counts' table (small tables only)")
    p.add_argument("--label-by", metavar="ATTRIBUTE",
                   help="name moved nodes by this node attribute (--json: a 'moved_labels' list beside 'moved_nodes')")

    # --- tracked sets and updates (workspace/cli/tracking.py) ----------------------------
    p = add("track", "the parameter sets a network re-runs on each new version: add, remove, list",
            "tracking", "cmd_track")
    tsub = p.add_subparsers(dest="track_action", metavar="ACTION", required=True)
    for name, help_ in (("add", "track a parameter set (PROJECT/NAME tracks its latest version)"),
                        ("remove", "stop tracking (PROJECT/NAME without @V: every version of it); runs are kept")):
        q = tsub.add_parser(name, help=help_, description=help_, parents=[common])
        q.add_argument("network", metavar="PROJECT/NETWORK")
        q.add_argument("params", metavar="PROJECT/NAME[@V]")
    q = tsub.add_parser("list", help="the tracked parameter sets of a network", parents=[common])
    q.add_argument("network", metavar="PROJECT/NETWORK")
    p = add("update", "run every tracked parameter set on a version (latest by default) and report what "
            "changed since the previous version", "tracking", "cmd_update")
    p.add_argument("ref", metavar="PROJECT/NETWORK[@V]")
    p.add_argument("--limit", type=int, default=10, help="events and moved nodes listed per set in text (default 10)")
    p = add("updates", "list updates (latest first; the default) or show one update's change report", "tracking",
            "cmd_updates")
    usub = p.add_subparsers(dest="updates_action", metavar="ACTION", required=False)  # no ACTION: list
    p.set_defaults(network=None, limit=None)
    q = usub.add_parser("list", help="updates, latest first", parents=[common])
    q.add_argument("network", nargs="?", metavar="PROJECT/NETWORK")
    q.add_argument("--limit", type=int, default=None)
    q = usub.add_parser("show", help="the change report of an update (default: the latest)", parents=[common])
    q.add_argument("update", nargs="?", type=int)
    q.add_argument("--network", metavar="PROJECT/NETWORK", help="without UPDATE: the latest update of this network")
    q.add_argument("--limit", type=int, default=10, help="events and moved nodes listed per set in text (default 10)")

    # --- upkeep -------------------------------------------------------------------------
    add("verify", "check every stored array against its hash, and the database's integrity", "upkeep",
        "cmd_verify")

    p = add("copy", "copy projects, one network or one run's lineage from --store to another store "
            "(SQLite or PostgreSQL); copying again adds nothing", "copy", "cmd_copy")
    p.add_argument("--to", required=True, metavar="PATH|URL", help="destination store (made when it does not exist)")
    scope = p.add_mutually_exclusive_group()
    scope.add_argument("--project", dest="projects", action="append", default=[], metavar="NAME",
                       help="a project to copy (repeatable; default: every project)")
    scope.add_argument("--network", metavar="PROJECT/NETWORK", help="one network with its runs")
    scope.add_argument("--run", type=int, metavar="RUN",
                       help="one run with its version chain and parameter-set versions")

    p = add("delete", "delete a project or a network with everything in it (asks first)", "upkeep", "cmd_delete")
    p.add_argument("target", metavar="PROJECT[/NETWORK]")
    p.add_argument("--yes", action="store_true", help="do not ask")

    # --- housekeeping: single runs, annotations, members, comparison matrix ---------------
    p = add("delete-run", "delete runs (cancelled or test runs) with their measures and annotations (asks first)",
            "housekeeping", "cmd_delete_run")
    p.add_argument("runs", nargs="+", type=int, metavar="RUN")
    p.add_argument("--yes", action="store_true", help="do not ask")

    target_help = "a run id, a network version PROJECT/NETWORK[@V] (latest when @V is left out), or with " \
                  "--params a parameter set PROJECT/NAME[@V]"
    for name, help_, func in (("note", "add a note to a run, network version or parameter set", "cmd_note"),
                              ("tag", "put tags on a run, network version or parameter set", "cmd_tag"),
                              ("untag", "take tags off a run, network version or parameter set", "cmd_untag"),
                              ("annotations", "the tags, notes and annotation history of a run, network "
                                              "version or parameter set", "cmd_annotations")):
        p = add(name, help_, "notes", func)
        p.description = help_ + "; the annotated record itself never changes (annotations are events of their own)"
        p.add_argument("target", metavar="TARGET", help=target_help)
        if name == "note":
            p.add_argument("text", help="the note")
        elif name != "annotations":
            p.add_argument("tags", nargs="+", metavar="TAG", help="one word each")
        p.add_argument("--params", action="store_true", help="TARGET is a parameter set")
    p = add("tagged", "everything that currently carries a tag", "notes", "cmd_tagged")
    p.add_argument("tag")

    p = add("members", "the nodes in each community of a run (or in one community)", "housekeeping", "cmd_members")
    p.add_argument("run", type=int)
    p.add_argument("community", nargs="?", type=int, help="only this community")
    p.add_argument("--limit", type=int, default=None,
                   help="nodes listed per community (text default 50; --json lists all unless given)")
    p.add_argument("--offset", type=int, default=0, help="skip this many nodes of each community first")
    p.add_argument("--label-by", metavar="ATTRIBUTE", help="show nodes by this node attribute (stored node table)")

    p = add("compare", "ARI, NMI and VI of every pair of several runs (a comparison matrix)", "housekeeping",
            "cmd_compare")
    p.add_argument("runs", nargs="+", type=int, metavar="RUN")
    p.add_argument("--nodes", choices=["common", "all"], default="common",
                   help="score shared nodes only (default) or give absent nodes an 'absent' group")
    p.add_argument("--nmi", choices=["arithmetic", "geometric", "max", "min"], default="arithmetic",
                   help="NMI normalisation (default arithmetic)")

    p = add("demo", "build the invented demo workspace and open it", "demo", "cmd_demo")
    p.add_argument("--no-ui", action="store_true", help="build only; do not open the terminal workspace")
    p.add_argument("--rebuild", action="store_true", help="delete and rebuild the default demo store")

    add("ui", "open the terminal workspace", "demo", "cmd_ui")

    return parser
