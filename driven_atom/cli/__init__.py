"""The ``driven-atom`` command: parse, call the Python API, print. Nothing else lives here.

Each area registers its subcommands from its own module (``register(subparsers)``); a handler
returns a dict (printed as one JSON object with ``--json``) or prints its own table.
Bad input -> one line on stderr, exit code 2 (every exit code: :func:`main`).
"""
from __future__ import annotations

import argparse
import json
import math
import sys

from driven_atom.errors import InputError

# modules that define subcommands; each has register(subparsers)
_COMMAND_MODULES = ["driven_atom.cli.atom_cmds", "driven_atom.cli.pulse_cmd", "driven_atom.cli.run_cmd", "driven_atom.cli.campaign_cmds",
                    "driven_atom.cli.estimate_cmd", "driven_atom.cli.plot_cmd", "driven_atom.cli.check_cmd",
                    "driven_atom.cli.converge_cmd", "driven_atom.cli.keys_cmd", "driven_atom.cli.report_cmd"]

SAFETY_CAUTION = (
    "CAUTION: lasers at these intensities are class-4 hazards: direct, reflected and scattered beams "
    "injure eyes and skin. Wear eye protection rated for the wavelength and skin protection; local "
    "laser-safety rules and your site's laser safety officer govern. These numbers are estimates, "
    "not a safety assessment."
)


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2
        raise InputError(f"{self.prog}: {message}")


def add_common(parser: argparse.ArgumentParser) -> None:
    """Options every command takes."""
    parser.add_argument("--json", action="store_true", help="print exactly one JSON object on stdout")


def add_atom_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--Z", type=int, default=None, help="nuclear charge (default 1)")
    parser.add_argument("--nucleus", default=None,
                        help='nucleus: "infinite", "H", "D", "T", "He3", "He", "Li", ... or a mass "1.00728 u" '
                             '(default: "H" for Z=1, else the most abundant isotope)')


def _map_floats(obj, fn):
    """``obj`` as plain JSON-able Python (dict keys as str, sequences and numpy values as lists and
    Python numbers) with ``fn`` applied to every float."""
    if isinstance(obj, dict):
        return {str(k): _map_floats(v, fn) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_map_floats(v, fn) for v in obj]
    if hasattr(obj, "tolist"):
        return _map_floats(obj.tolist(), fn)
    return fn(obj) if isinstance(obj, float) else obj


def _clean(obj):
    """Plain floats for JSON; NaN/inf -> null."""
    return _map_floats(obj, lambda x: x if math.isfinite(x) else None)


def significant(obj, digits: int = 12):
    """``obj`` with every float rounded to ``digits`` significant digits (derived quantities of
    inputs given to a few digits: 100.00000000000001 W/cm² prints as 100.0).

    >>> significant({"I": [100.00000000000001, 2]})
    {'I': [100.0, 2]}
    """
    return _map_floats(obj, lambda x: float(f"{x:.{digits}g}") if math.isfinite(x) else x)


def emit_json(payload: dict) -> None:
    sys.stdout.write(json.dumps(_clean(payload)) + "\n")


def build_parser() -> argparse.ArgumentParser:
    import importlib

    parser = _Parser(prog="driven-atom", description="Simulate one-electron atoms driven by laser pulses.")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    for name in _COMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name == name:
                continue
            raise
        module.register(sub)
    return parser


def main(argv=None) -> int:
    """Run one command; exit codes: 0 done, 1 a check failed or a file could not be written (disk
    full, read-only), 2 bad input or a refused run, 3 a scan that ended with failed jobs, 4 a
    campaign on a batch system that lost all its workers (jobs stay pending), 128 + signal when a
    signal stopped a run after its checkpoint."""
    import warnings

    from driven_atom.errors import Interrupted, WorkersLost, one_line, short
    from driven_atom.io import StorageError

    def warn(message, category, filename, lineno, file=None, line=None):  # noqa: ARG001
        sys.stderr.write(f"driven-atom: warning: {one_line(short(str(message)))}\n")

    try:
        with warnings.catch_warnings():
            warnings.showwarning = warn
            args = build_parser().parse_args(argv)
            payload = args.handler(args)
        if getattr(args, "json", False) and payload is not None:
            emit_json(payload)
        return getattr(args, "exit_code", 0)         # a handler may report e.g. a failed check with 1
    except InputError as exc:
        sys.stderr.write(f"driven-atom: error: {one_line(short(str(exc), 600))}\n")
        return 2
    except StorageError as exc:
        sys.stderr.write(f"driven-atom: error: {one_line(exc.strerror or exc)}\n")
        return 1
    except OSError as exc:   # a file or folder the user named cannot be read or written
        where = f" {short(exc.filename)!r}" if getattr(exc, "filename", None) else ""
        sys.stderr.write(f"driven-atom: error:{one_line(where)} {one_line(exc.strerror or exc)}\n")
        return 2
    except Interrupted as exc:
        sys.stderr.write(f"driven-atom: {one_line(exc)}\n")
        return exc.exit_code
    except WorkersLost as exc:
        sys.stderr.write(f"driven-atom: error: {one_line(exc)}\n")
        return exc.exit_code
    except KeyboardInterrupt:
        sys.stderr.write("driven-atom: interrupted\n")
        return 130


if __name__ == "__main__":
    sys.exit(main())
