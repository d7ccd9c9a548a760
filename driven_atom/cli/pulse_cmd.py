"""``driven-atom pulse CONFIG [--plot FILE] [--json]``: derived quantities of the config's pulses.

Prints a table (or one JSON object with ``pulses``, ``field_area_au`` and ``caution``) and, when
the pulse's fluence reaches the skin exposure limit (:func:`driven_atom.safety.laser_caution`), the
laser-safety caution with the numbers that call for it (``caution``: null when none).
"""
from __future__ import annotations

# (JSON key, table heading, format)
_COLUMNS = [
    ("peak_field_au", "peak field [au]", "{:.4g}"),
    ("intensity_Wcm2", "intensity [W/cm^2]", "{:.4g}"),
    ("photon_energy_eV", "photon energy [eV]", "{:.5g}"),
    ("wavelength_nm", "wavelength [nm]", "{:.5g}"),
    ("fwhm_fs", "FWHM (intensity) [fs]", "{:.4g}"),
    ("length_fs", "length foot-to-foot [fs]", "{:.4g}"),
    ("Up_eV", "Up [eV]", "{:.4g}"),
    ("keldysh", "Keldysh gamma", "{:.4g}"),
    ("quiver_au", "quiver amplitude [au]", "{:.4g}"),
    ("fluence_Jcm2", "fluence [J/cm^2]", "{:.4g}"),
]


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("pulse", help="derived pulse quantities (peak field, Up, Keldysh gamma, fluence)",
                              description="Print the derived quantities of the pulses in a run config.")
    p.add_argument("config", metavar="CONFIG", help="run configuration (TOML)")
    p.add_argument("--plot", metavar="FILE", default=None, help="draw E(t) and |E(omega)|^2 into FILE (png, pdf, svg)")
    add_common(p)
    p.set_defaults(handler=handle)


def _format(value, fmt: str) -> str:
    return "-" if value is None else fmt.format(value)


def table(derived: dict) -> str:
    """The derived quantities as a text table, one column per pulse."""
    rows = derived["pulses"]
    head = ["", *(f"pulse.{i} {r['envelope']} {r['polarization']}" for i, r in enumerate(rows))]
    lines = [head]
    for key, label, fmt in _COLUMNS:
        lines.append([label, *(_format(r[key], fmt) for r in rows)])
    widths = [max(len(line[j]) for line in lines) for j in range(len(head))]
    text = ["  ".join(cell.ljust(w) if j == 0 else cell.rjust(w) for j, (cell, w) in enumerate(zip(line, widths)))
            for line in lines]
    text.append(f"window {derived['t_start_fs']:.4g} .. {derived['t_end_fs']:.4g} fs; "
                f"field area integral E dt = {derived['field_area_au']:.3g} au")
    text.extend(f"pulse.{i}: {r['note']}" for i, r in enumerate(rows) if r["note"])
    return "\n".join(text)


def handle(args):
    from driven_atom.routes import load_config
    from driven_atom.cli import significant
    from driven_atom.errors import InputError
    from driven_atom.pulse import build_pulse, derived_quantities
    from driven_atom.safety import laser_caution

    cfg = load_config(args.config)
    pulse = build_pulse(cfg)
    if pulse is None:
        raise InputError(f"config {args.config!r} has no [[pulse]] table")
    derived = significant(derived_quantities(pulse, cfg.build_atom()))
    if args.plot:
        from driven_atom.plotting import pulse_figure

        pulse_figure(pulse, args.plot)
    caution = laser_caution(pulse)
    if args.json:
        return {**derived, "caution": caution}
    print(table(derived))
    if args.plot:
        print(f"figure written to {args.plot}")
    if caution:
        print(caution)
    return None
