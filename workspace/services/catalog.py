"""What the methods are and which parameters they take (read from their declared schemas)."""

from __future__ import annotations

from typing import Any

from workspace.errors import NotFoundError


def _allowed(p) -> str:
    if getattr(p, "choices", None):
        return "|".join(map(str, p.choices))
    lo, hi = getattr(p, "minimum", None), getattr(p, "maximum", None)
    if lo is None and hi is None:
        return "any" if p.type != "bool" else "true|false"
    return f"[{'' if lo is None else lo}, {'' if hi is None else hi}]"


def describe_methods(name: str | None = None) -> list[dict[str, Any]]:
    from workspace.spectral.methods import METHODS

    names = sorted(METHODS) if name is None else [name]
    out = []
    for n in names:
        if n not in METHODS:
            raise NotFoundError(f"unknown method {n!r}; choose from {', '.join(sorted(METHODS))}")
        m = METHODS[n]
        out.append({"name": m.name, "summary": m.summary, "reference": m.reference, "family": m.family,
                    "supports_auto_k": m.supports_auto_k, "default_k": m.default_k,
                    "params": [{"name": p.name, "type": p.type, "default": p.default, "allowed": _allowed(p),
                                "minimum": p.minimum, "maximum": p.maximum,
                                "choices": list(p.choices) if p.choices else None, "help": p.help}
                               for p in m.params]})
    return out
