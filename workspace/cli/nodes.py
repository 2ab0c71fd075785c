"""Commands: nodes add | show | values — node attribute tables stored with network versions."""

from __future__ import annotations

from workspace.cli.common import emit_json, session


def value_text(value) -> str:
    """A node attribute value as a table shows it: true/false, whole numbers without ``.0``, '-' for none."""
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def print_table_summary(out, table: dict) -> None:
    """Lines about a node table: source, rows, coordinates and each attribute with its type."""
    coords = table.get("coords")
    where = f"; positions from {coords['x']},{coords['y']} ({coords['kind']})" if coords else ""
    out.line(f"  node attributes from {table['source']}: {table['rows']} rows{where}")
    cols = table.get("columns") or []
    out.line("  " + ", ".join(f"{c['name']} ({c['type']})" for c in cols))


def cmd_nodes(args) -> int:
    action = args.nodes_action
    if action == "add":
        from workspace.services.nodes import add_node_table, parse_coords

        coords = parse_coords(args.coords)
        with session(args, writes=True) as (store, out):
            res = add_node_table(store, args.ref, args.file, format=args.nodes_format, coords=coords,
                                 message=args.message)
            if args.json:
                emit_json(res)
            elif res["new_version"]:
                out.line(f"added node table as {res['ref']} (graph of version {res['based_on']}, same arrays "
                         f"and content hash [{res['content_hash'][:12]}]; attributes "
                         f"[{res['table']['attributes_hash'][:12]}])")
                print_table_summary(out, res["table"])
            else:
                out.line(f"unchanged: {res['ref']} already has this graph and this node table; no new version made")
        return 0
    if action == "show":
        from workspace.services.nodes import show_node_table

        with session(args) as (store, out):
            res = show_node_table(store, args.ref)
            if args.json:
                emit_json(res)
                return 0
            t = res["table"]
            if t is None:
                out.line(f"{res['ref']} has no node attribute table (add one: cutbook nodes add {res['ref']} FILE)")
                return 0
            coords = t.get("coords")
            out.line(f"{res['ref']}: node attributes from {t['source']}, {t['rows']} rows  "
                     f"[{t['attributes_hash'][:12]}]" + (f"; positions {coords['x']},{coords['y']} "
                                                           f"({coords['kind']})" if coords else ""))
            rows = [[c["name"], c["type"], c["present"], c["missing"], c["distinct"],
                     ", ".join(map(value_text, c["examples"]))] for c in t["columns"]]
            out.table(["attribute", "type", "nodes", "missing", "distinct", "examples"], rows,
                      right=["nodes", "missing", "distinct"])
        return 0
    from workspace.services.nodes import node_values

    with session(args) as (store, out):
        res = node_values(store, args.ref, args.attribute)
        if args.json:
            emit_json(res)
            return 0
        shown = res["nodes"][:max(args.limit, 0)]
        out.line(f"{res['ref']}: {res['attribute']} ({res['type']}) of {len(res['nodes'])} nodes")
        out.table(["node", res["attribute"]], [[n, value_text(v)] for n, v in shown])
        if len(res["nodes"]) > len(shown):
            out.line(f"  and {len(res['nodes']) - len(shown)} more (--limit N, or --json for all)")
    return 0
