"""``driven-atom keys [SECTION|ROUTE] [--markdown] [--json]``: the reference of every config key.

Read off the pydantic models (:mod:`driven_atom.key_reference`): per key its type and range, unit
kind, default and meaning. SECTION is atom, fields, pulse, output or solver (every route), or a
route name (levels, basis, grid). ``--markdown`` prints the whole reference as ``docs/config.md``
holds it; ``--json`` prints ``{"sections": [{"section", "heading", "keys": [...]}]}``.
"""
from __future__ import annotations

import sys


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("keys", help="reference of every config key (type, unit, default, meaning)",
                              description="Print every key a config accepts, from the models that check it.")
    p.add_argument("section", metavar="SECTION|ROUTE", nargs="?", default=None,
                   help="atom, fields, pulse, output, solver, or a route: levels, basis, grid (default: all)")
    p.add_argument("--markdown", action="store_true", help="the whole reference as Markdown (docs/config.md)")
    add_common(p)
    p.set_defaults(handler=handle)


def handle(args):
    from driven_atom.errors import InputError
    from driven_atom.key_reference import markdown, sections, text

    if args.markdown:
        if args.section is not None or args.json:
            raise InputError("`--markdown` prints the whole reference: give no SECTION and no --json")
        sys.stdout.write(markdown())
        return None
    if args.json:
        return {"sections": sections(args.section)}
    sys.stdout.write(text(args.section))
    return None
