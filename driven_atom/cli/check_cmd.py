"""``driven-atom check [--only NAME ...] [--json]``: the built-in validation against published values
(:mod:`driven_atom.validation`). Prints a table; exit code 0 when every check passes, 1 when one fails."""
from __future__ import annotations


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("check", help="validate this install against published values (a few seconds)",
                              description="Compute reference quantities (lines, A-values, cross sections, "
                                          "polarisability, Rabi flopping, ...) and compare them with their "
                                          "published values.")
    p.add_argument("--only", nargs="+", metavar="NAME", default=None, help="run only the checks with these names")
    add_common(p)
    p.set_defaults(handler=handle)


def table(rows) -> str:
    head = ("check", "value", "reference", "deviation", "tolerance", "", "source")
    body = [(r["name"], f"{r['value']:.8g} {r['unit']}".strip(), f"{r['reference']:.8g}", f"{r['deviation']:.1e}",
             f"{r['tolerance']:.0e}", "ok" if r["passed"] else "FAILED", r["source"]) for r in rows]
    widths = [max(len(line[j]) for line in [head, *body]) for j in range(len(head))]
    lines = ["  ".join(cell.ljust(w) for cell, w in zip(line, widths)).rstrip() for line in [head, *body]]
    failed = sum(not r["passed"] for r in rows)
    lines.append(f"{len(rows) - failed} of {len(rows)} checks passed" + (f", {failed} FAILED" if failed else ""))
    return "\n".join(lines)


def handle(args):
    from driven_atom.validation import run_checks

    rows = run_checks(args.only)
    failed = sum(not r["passed"] for r in rows)
    args.exit_code = 1 if failed else 0
    if args.json:
        return {"checks": rows, "passed": len(rows) - failed, "failed": failed}
    print(table(rows))
    return None
