"""Named, versioned parameter sets (per project)."""

from __future__ import annotations

import hashlib
import json
import re
from typing import Any

from sqlalchemy import select

from workspace.errors import NotFoundError, ParameterError, UsageError
from workspace.services import iso_time
from workspace.store import repo
from workspace.store.db import Store
from workspace.store.schema import ParamSet, ParamSetVersion, Project

_REF = re.compile(r"^(?P<project>[^/@\s]+)/(?P<name>[^/@\s]+)(?:@(?P<version>\d+))?$")


def parse_params_ref(text: str) -> tuple[str, str, int | None]:
    m = _REF.match(text.strip())
    if not m:
        raise UsageError(f"not a parameter-set reference: {text!r} (expected project/name[@version])")
    v = m.group("version")
    return m.group("project"), m.group("name"), int(v) if v is not None else None


def parse_sets(items: list[str] | None) -> dict[str, str]:
    """``["key=value", …]`` from the command line -> dict (values stay strings; the schema converts)."""
    out: dict[str, str] = {}
    for item in items or []:
        key, sep, value = item.partition("=")
        if not sep or not key.strip():
            raise UsageError(f"--set takes key=value, got {item!r}")
        out[key.strip()] = value.strip()
    return out


def normalize_k(method: str, k: Any) -> str | None:
    """Validate a requested k against the method: an integer >= 2, ``"auto"`` where supported, or None."""
    from workspace.spectral.methods import METHODS

    info = METHODS[method]
    if k is None or k == "":
        return None
    if isinstance(k, str) and k.strip().lower() == "auto":
        if not info.supports_auto_k:
            raise ParameterError(f"method {method!r} cannot choose k by itself (k='auto'); give a number")
        return "auto"
    try:
        value = int(k)
    except (TypeError, ValueError):
        raise ParameterError(f"k must be an integer >= 2 or 'auto', got {k!r}") from None
    if value < 2 or str(value) != str(k).strip():
        raise ParameterError(f"k must be an integer >= 2 or 'auto', got {k!r}")
    if not info.accepts_k:
        raise ParameterError(f"method {method!r} chooses the number of communities itself; leave k out")
    if info.fixed_k is not None and value != info.fixed_k:
        raise ParameterError(f"method {method!r} always makes {info.fixed_k} parts (got k={value}); "
                             "use recursive, njw or shi-malik for more")
    return str(value)


def k_argument(k: str | None) -> int | str | None:
    return None if k is None else ("auto" if k == "auto" else int(k))


def validate(method: str, k: Any, values: dict[str, Any]) -> tuple[str | None, dict[str, Any]]:
    from workspace.spectral.methods import METHODS, validate_params

    if method not in METHODS:
        raise ParameterError(f"unknown method {method!r}; choose from {', '.join(sorted(METHODS))}")
    return normalize_k(method, k), validate_params(method, dict(values))


def _values_hash(method: str, k: str | None, params: dict[str, Any]) -> str:
    doc = json.dumps({"method": method, "k": k, "params": params}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(doc.encode()).hexdigest()


def _row_dict(project: str, name: str, v: ParamSetVersion) -> dict[str, Any]:
    return {"project": project, "name": name, "version": v.number, "ref": f"{project}/{name}@{v.number}",
            "method": v.method, "k": v.k, "params": json.loads(v.values_json),
            "created": iso_time(v.created_at), "by": v.created_by}


def save_params(store: Store, ref: str, *, method: str, k: Any = None,
                values: dict[str, Any] | None = None) -> dict[str, Any]:
    """Validate and save; equal values return the existing version (``created`` False)."""
    project, name, version = parse_params_ref(ref)
    if version is not None:
        raise UsageError("save takes project/name without @version: versions are numbered for you")
    k_norm, params = validate(method, k, values or {})
    digest = _values_hash(method, k_norm, params)
    with store.write() as s:
        proj = repo.get_or_create_project(s, project)
        ps = s.scalar(select(ParamSet).where(ParamSet.project_id == proj.id, ParamSet.name == name))
        if ps is None:
            ps = ParamSet(project_id=proj.id, name=name, created_at=repo.utcnow())
            s.add(ps)
            s.flush()
        existing = s.scalar(select(ParamSetVersion).where(ParamSetVersion.param_set_id == ps.id,
                                                          ParamSetVersion.values_hash == digest))
        if existing is not None:
            return {**_row_dict(project, name, existing), "created_new": False}
        last = s.scalar(select(ParamSetVersion.number).where(ParamSetVersion.param_set_id == ps.id)
                        .order_by(ParamSetVersion.number.desc()).limit(1)) or 0
        v = ParamSetVersion(param_set_id=ps.id, number=last + 1, method=method, k=k_norm,
                            values_json=json.dumps(params, sort_keys=True), values_hash=digest,
                            created_at=repo.utcnow())
        s.add(v)
        s.flush()
        return {**_row_dict(project, name, v), "created_new": True}


def find_params(s, ref: str) -> tuple[str, str, ParamSetVersion]:
    project, name, version = parse_params_ref(ref)
    ps = s.scalar(select(ParamSet).join(Project, Project.id == ParamSet.project_id)
                  .where(Project.name == project, ParamSet.name == name))
    if ps is None:
        from workspace.services.suggest import close_names, hint

        names = [f"{p}/{n}" for p, n in s.execute(select(Project.name, ParamSet.name)
                                                 .join(ParamSet, ParamSet.project_id == Project.id)).all()]
        raise NotFoundError(f"no parameter set {project}/{name}{hint(close_names(f'{project}/{name}', names))}")
    q = select(ParamSetVersion).where(ParamSetVersion.param_set_id == ps.id)
    q = q.where(ParamSetVersion.number == version) if version is not None else \
        q.order_by(ParamSetVersion.number.desc()).limit(1)
    v = s.scalar(q)
    if v is None:
        newest = s.scalar(select(ParamSetVersion.number).where(ParamSetVersion.param_set_id == ps.id)
                          .order_by(ParamSetVersion.number.desc()).limit(1))
        raise NotFoundError(f"parameter set {project}/{name} has no version {version} "
                            f"(its versions are 1 to {newest})")
    return project, name, v


def show_params(store: Store, ref: str) -> dict[str, Any]:
    with store.read() as s:
        project, name, v = find_params(s, ref)
        out = _row_dict(project, name, v)
        out["versions"] = list(s.scalars(select(ParamSetVersion.number)
                                         .where(ParamSetVersion.param_set_id == v.param_set_id)
                                         .order_by(ParamSetVersion.number)))
        from workspace.services.annotations import current_for

        out.update(current_for(s, "params", [v.id]).get(v.id, {"tags": [], "notes": []}))
        return out


def list_params(store: Store, project: str | None = None) -> list[dict[str, Any]]:
    with store.read() as s:
        if project is not None and repo.find_project(s, project) is None:
            from workspace.services.networks import project_not_found

            raise project_not_found(s, project)
        q = (select(Project.name, ParamSet.name, ParamSetVersion)
             .join(ParamSet, ParamSet.project_id == Project.id)
             .join(ParamSetVersion, ParamSetVersion.param_set_id == ParamSet.id)
             .order_by(Project.name, ParamSet.name, ParamSetVersion.number))
        if project is not None:
            q = q.where(Project.name == project)
        rows = s.execute(q).all()
        from workspace.services.annotations import current_for

        ann = current_for(s, "params", [v.id for _, _, v in rows])
        return [{**_row_dict(p, n, v), "tags": ann.get(v.id, {}).get("tags", [])} for p, n, v in rows]
