"""A method's parameter form, generated from the schema the method declares.

Every field comes from :func:`workspace.services.catalog.describe_methods`
(name, type, default, range or choices, help); the form holds no list of
parameters of its own. Values are checked on every change by
:func:`workspace.services.params.validate`, the same check a saved parameter
set and the command line go through, and its one-line message is shown under
the form.
"""

from __future__ import annotations

from typing import Any

from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.widgets import Input, Label, Select, Static, Switch

from workspace.errors import CutbookError


class ParamForm(Vertical):
    """Fields for ``k`` and each declared parameter of one method."""

    DEFAULT_CSS = """
    ParamForm { height: auto; }
    ParamForm .field { height: auto; margin-bottom: 0; }
    ParamForm .field .field-row { margin-bottom: 0; }
    ParamForm .field Label.name { width: 18; padding: 0 1 0 0; }
    ParamForm .field Input, ParamForm .field Select { width: 1fr; }
    ParamForm .help { padding: 0 0 0 18; height: auto; }
    """

    class Changed(Message):
        """The values changed; ``error`` is the validation message or None when they are valid."""

        def __init__(self, form: "ParamForm", error: str | None) -> None:
            super().__init__()
            self.form, self.error = form, error

        @property
        def control(self) -> "ParamForm":
            return self.form

    def __init__(self, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.method: dict[str, Any] | None = None
        self.error: str | None = None
        self._filling = False

    def compose(self):
        yield Static("choose a method or a saved parameter set", classes="help", id="form-empty")

    async def set_method(self, method: dict[str, Any], *, k: Any = None,
                         values: dict[str, Any] | None = None) -> None:
        """Rebuild the fields for ``method`` (one entry of ``describe_methods()``), pre-filled."""
        self._filling = True
        self.method = method
        values = values or {}
        await self.remove_children()
        default_k = method.get("default_k")
        k_value = k if k is not None else default_k
        rows = [self._field("k", Input(value="" if k_value is None else str(k_value), id="pf-k",
                                       placeholder="integer ≥ 2" + (" or auto" if method["supports_auto_k"] else ""),
                                       compact=True),
                            "number of communities" + (" (or 'auto')" if method["supports_auto_k"] else ""))]
        for p in method["params"]:
            value = values.get(p["name"], p["default"])
            wid = f"pf-{p['name']}"
            if p.get("choices"):
                control = Select([(str(c), c) for c in p["choices"]], value=value if value in p["choices"]
                                 else p["choices"][0], allow_blank=False, id=wid, compact=True)
            elif p["type"] == "bool":
                control = Switch(value=bool(value), id=wid)
            else:
                control = Input(value="" if value is None else str(value), id=wid,
                                placeholder=f"{p['type']} {p.get('allowed', '')}", compact=True)
            help_text = p.get("help") or ""
            if p.get("allowed") and not p.get("choices"):
                help_text += f"  [{p['type']} in {p['allowed']}]"
            rows.append(self._field(p["name"], control, help_text))
        rows.append(Static("", id="pf-error", classes="form-error"))
        await self.mount_all(rows)
        self._filling = False
        self.revalidate()

    @staticmethod
    def _field(name: str, control, help_text: str) -> Vertical:
        return Vertical(Horizontal(Label(name, classes="name"), control, classes="field-row"),
                        Static(help_text, classes="help"), classes="field")

    def raw_values(self) -> tuple[str, dict[str, Any]]:
        """(k text, {parameter: value}) as typed; strings are converted by the schema check."""
        if self.method is None:
            return "", {}
        k = self.query_one("#pf-k", Input).value.strip()
        out: dict[str, Any] = {}
        for p in self.method["params"]:
            w = self.query_one(f"#pf-{p['name']}")
            if isinstance(w, Input):
                out[p["name"]] = w.value.strip()
            elif isinstance(w, Select):
                out[p["name"]] = w.value
            elif isinstance(w, Switch):
                out[p["name"]] = w.value
        return k, out

    def validated(self) -> tuple[str | None, dict[str, Any]]:
        """(k, values) after the method's schema check; raises ParameterError with a one-line message."""
        from workspace.services.params import validate

        if self.method is None:
            from workspace.errors import UsageError

            raise UsageError("choose a method or a saved parameter set first")
        k, values = self.raw_values()
        return validate(self.method["name"], k or None, values)

    def revalidate(self) -> str | None:
        if self.method is None:
            return None
        try:
            self.validated()
            self.error = None
        except CutbookError as exc:
            self.error = str(exc)
        except (TypeError, ValueError) as exc:  # a conversion the schema did not word itself
            self.error = f"{type(exc).__name__}: {exc}"
        for w in self.query(Input):
            name = (w.id or "")[3:]
            w.set_class(bool(self.error) and (f"'{name}'" in self.error or f" {name} " in f" {self.error} "
                                               or self.error.startswith(f"{name} ")), "-invalid-param")
        err = self.query("#pf-error")
        if err:
            err.first(Static).update(("✗ " + self.error) if self.error else "✓ values fit the method's schema")
            err.first(Static).set_class(self.error is None, "ok")
        self.post_message(self.Changed(self, self.error))
        return self.error

    def on_input_changed(self, event: Input.Changed) -> None:
        event.stop()
        if not self._filling:
            self.revalidate()

    def on_select_changed(self, event: Select.Changed) -> None:
        event.stop()
        if not self._filling:
            self.revalidate()

    def on_switch_changed(self, event: Switch.Changed) -> None:
        event.stop()
        if not self._filling:
            self.revalidate()
