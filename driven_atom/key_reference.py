"""The reference of every config key, read off the pydantic models (the one source of truth).

:func:`sections` walks :class:`~driven_atom.config.AtomConfig`, ``FieldsConfig``, ``PulseConfig``,
``OutputConfig`` and the ``[solver]`` model of every route (:data:`driven_atom.settings.SETTINGS`)
and gives, per key: its type with the allowed range, its unit kind (a plain number is in atomic
units of that kind), its default and its meaning (the field's description). ``driven-atom keys``
prints it; ``docs/config.md`` is :func:`markdown` of it (a test regenerates the file and fails when
it is out of date: ``driven-atom keys --markdown > docs/config.md``).

>>> rows = {row["key"]: row for row in section_rows("grid")}
>>> rows["dr"]["unit"], rows["absorber"]["type"]
('length', 'one of "mask" | "none"')
"""
from __future__ import annotations

import typing

from driven_atom.errors import InputError

SECTIONS = ("atom", "fields", "pulse", "solver", "output")


def _models() -> dict:
    """section name -> (heading, pydantic model class)."""
    from driven_atom.config import AtomConfig, FieldsConfig, OutputConfig, PulseConfig, WeightedState
    from driven_atom.settings import SETTINGS

    models = {"atom": ("[atom]", AtomConfig), "atom.initial": ("[atom] initial = [{...}, ...] (each item)",
                                                               WeightedState),
              "fields": ("[fields]", FieldsConfig), "pulse": ("[[pulse]]", PulseConfig)}
    for route, model in SETTINGS.items():
        models[route] = (f'[solver] route = "{route}"', model)
    models["output"] = ("[output]", OutputConfig)
    return models


def _bounds(metadata) -> str:
    """The range a field's validator enforces (from the Quantity/Number/Integer partials)."""
    for item in metadata:
        func = getattr(item, "func", None)
        args = getattr(func, "args", ())
        bounds = next((a for a in args if hasattr(a, "text") and hasattr(a, "check")), None)
        if bounds is not None and bounds.text:
            return bounds.text
    return ""


def _type_text(annotation) -> tuple[str, bool]:
    """(readable type, optional) of a field annotation."""
    from driven_atom.quantities import Cadence, UnitKind

    args = typing.get_args(annotation)
    origin = typing.get_origin(annotation)
    if origin is typing.Annotated:
        base, *meta = args
        kind = next((m.kind for m in meta if isinstance(m, UnitKind)), None)
        bounds = _bounds(meta)
        if kind is not None:
            from driven_atom.quantities import AU_UNIT_NAME

            nonzero = bounds and any(ch in "123456789" for ch in bounds)
            return f"quantity {bounds}".strip() + (f" {AU_UNIT_NAME.get(kind, 'au')}" if nonzero else ""), False
        if base is Cadence:
            return "time with units (or a whole number of steps where the route counts them)", False
        if base is bool:
            return "true | false", False
        name = {float: "number", int: "whole number"}.get(base, getattr(base, "__name__", str(base)))
        return f"{name} {bounds}".strip(), False
    if origin is typing.Literal:
        return "one of " + " | ".join(f'"{a}"' if isinstance(a, str) else str(a) for a in args), False
    if origin in (typing.Union, getattr(__import__("types"), "UnionType", None)):
        parts = [_type_text(a)[0] for a in args if a is not type(None)]
        return " or ".join(parts), type(None) in args
    if origin is list:
        inner = args[0] if args else str
        if isinstance(inner, type) and hasattr(inner, "model_fields"):
            return "list of {" + ", ".join(inner.model_fields) + "}", False
        return f"list of {_type_text(inner)[0]}", False
    if annotation is str:
        return "text", False
    if annotation is bool:
        return "true | false", False
    return getattr(annotation, "__name__", str(annotation)), False


def _default_text(field, kind: str | None) -> str:
    from pydantic_core import PydanticUndefined

    from driven_atom.quantities import AU_UNIT_NAME

    if field.is_required():
        return "required"
    value = field.default if field.default is not PydanticUndefined else field.default_factory()
    if value is None:
        return "unset"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, float) and kind is not None:
        return f"{value:g}" if value == 0 else f"{value:g} {AU_UNIT_NAME.get(kind, 'au')}"
    if isinstance(value, (int, float)):
        return f"{value:g}"
    if hasattr(value, "model_fields"):
        return "(defaults)"
    return str(value)


def section_rows(section: str) -> list[dict]:
    """One dict per key of ``section`` (a key of :func:`_models`): key, type, unit, default, meaning."""
    from driven_atom.quantities import unit_kind

    _, model = _models()[section]
    rows = []
    for key, field in model.model_fields.items():
        kind = unit_kind(model, key)
        type_text, _ = _type_text(field.annotation if not field.metadata else
                                  typing.Annotated[(field.annotation, *field.metadata)])
        rows.append({"key": key, "type": type_text, "unit": kind or "", "default": _default_text(field, kind),
                     "meaning": " ".join((field.description or "").split())})
    return rows


def sections(which: str | None = None) -> list[dict]:
    """``[{"section", "heading", "keys": [rows]}]`` for every section, or for ``which``: a section
    (atom, fields, pulse, solver, output) or a route name (levels, basis, grid)."""
    models = _models()
    from driven_atom.settings import SETTINGS

    if which is None:
        names = list(models)
    elif which == "solver":
        names = list(SETTINGS)
    elif which == "atom":
        names = ["atom", "atom.initial"]
    elif which in models and which != "atom.initial":
        names = [which]
    else:
        allowed = ", ".join([*SECTIONS, *SETTINGS])
        raise InputError(f"`SECTION` must be one of {allowed}, got {str(which)[:40]!r}")
    return [{"section": name, "heading": models[name][0], "keys": section_rows(name)} for name in names]


_INTRO = """# Config keys

Every key a run config accepts, generated from the pydantic models of `driven_atom/config.py` and
`driven_atom/settings.py` by `driven-atom keys --markdown` (do not edit by hand: a test compares this
file with the models). `driven-atom keys SECTION` prints one section (atom, fields, pulse, output, solver,
or a route: levels, basis, grid).

A *quantity* takes a string with units (`"800 nm"`, `"10 fs"`, `"1e14 W/cm^2"`) or a plain number in
atomic units of its unit kind; ranges are in atomic units. Unknown keys are refused with a "did you
mean". Scans (`[scan]`) and clusters (`[cluster]`) are described in `driven_atom/campaign/scan.py` and
`driven_atom/campaign/cluster.py` and in the README.
"""


def _cell(text: str) -> str:
    return text.replace("|", "\\|") if text else "–"


def markdown() -> str:
    """The whole reference as Markdown (the content of ``docs/config.md``)."""
    out = [_INTRO]
    for part in sections():
        out.append(f"\n## `{part['heading']}`\n\n| key | type | unit | default | meaning |\n|---|---|---|---|---|")
        for row in part["keys"]:
            out.append(f"| `{row['key']}` | {_cell(row['type'])} | {_cell(row['unit'])} | {_cell(row['default'])} | "
                       f"{_cell(row['meaning'])} |")
    return "\n".join(out) + "\n"


def text(which: str | None = None, width: int = 100) -> str:
    """The reference as plain text for the terminal."""
    import textwrap

    lines = []
    for part in sections(which):
        lines.append(part["heading"])
        for row in part["keys"]:
            facts = "; ".join(x for x in (row["type"], f"unit: {row['unit']}" if row["unit"] else "",
                                          f"default: {row['default']}") if x)
            lines.append(f"  {row['key']}  ({facts})")
            lines.extend(textwrap.wrap(row["meaning"], width=width, initial_indent="      ",
                                       subsequent_indent="      "))
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"
