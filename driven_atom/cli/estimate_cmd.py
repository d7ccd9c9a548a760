"""``driven-atom estimate CONFIG [--waist W] [--m2 M2] [--density N | --pressure P [--temperature T]]
[--length L] [--json]``: quick lab estimate of excitation and ionisation (:mod:`driven_atom.lab`).

Prints a table (or one JSON object with the keys of :func:`driven_atom.lab.estimate` and the
laser-safety caution as ``caution``) and the caution: its numbers size a real experiment.
"""
from __future__ import annotations

# (key, label, format)
_ROWS = [
    ("peak_intensity_Wcm2", "peak intensity [W/cm^2]", "{:.4g}"),
    ("peak_field_au", "peak field [au]", "{:.4g}"),
    ("keldysh", "Keldysh gamma", "{:.4g}"),
    ("barrier_suppression_Wcm2", "barrier suppression [W/cm^2]", "{:.4g}"),
    ("ionization", "ionisation probability at the peak", "{:.4g}"),
    ("saturation_intensity_Wcm2", "saturation intensity [W/cm^2]", "{:.4g}"),
    ("rayleigh_length_m", "Rayleigh length [m]", "{:.4g}"),
    ("pulse_energy_J", "pulse energy for this intensity [J]", "{:.4g}"),
    ("density_cm3", "gas density [cm^-3]", "{:.4g}"),
    ("ions_per_shot", "ions per shot (focal average)", "{:.4g}"),
    ("excited_per_shot", "excited atoms per shot (focal average)", "{:.4g}"),
]


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser("estimate", help="quick lab estimate: excitation and ionisation, atoms per shot",
                              description="Estimate in seconds what fraction of the atoms the pulses of "
                                          "CONFIG excite or ionise, and how many per shot in a Gaussian focus.")
    p.add_argument("config", metavar="CONFIG", help="run configuration (TOML); its [solver] is not used")
    p.add_argument("--waist", default=None, help='1/e^2 intensity radius of the focus, e.g. "20 um"')
    p.add_argument("--m2", type=float, default=1.0, help="beam quality factor M^2 (default 1)")
    p.add_argument("--density", default=None, help='gas density, e.g. "1e12 cm^-3"')
    p.add_argument("--pressure", default=None, help='gas pressure instead of a density, e.g. "1e-6 mbar"')
    p.add_argument("--temperature", default="293 K", help='gas temperature with --pressure (default "293 K")')
    p.add_argument("--length", default=None, help='interaction length along the beam (gas jet, cell), e.g. "1 mm"')
    add_common(p)
    p.set_defaults(handler=handle)


def table(out: dict) -> str:
    lines = [f"{out['state']}: ionisation potential {out['ionization_potential_eV']:.6g} eV, regime {out['regime']}"]
    rows = [(label, fmt.format(out[key])) for key, label, fmt in _ROWS if out.get(key) is not None]
    exc = out.get("excitation")
    if exc:
        rows += [(f"excitation {exc['transition']}: detuning [eV]", f"{exc['detuning_eV']:.4g}"),
                 ("  pulse area [rad]", f"{exc['pulse_area_rad']:.4g}"),
                 ("  excitation probability at the peak", f"{exc['probability']:.4g}")]
        if exc.get("pi_pulse_intensity_Wcm2") is not None:
            rows.append(("  intensity of a pi pulse [W/cm^2]", f"{exc['pi_pulse_intensity_Wcm2']:.4g}"))
    width = max(len(label) for label, _ in rows)
    lines += [f"  {label:<{width}}  {value}" for label, value in rows]
    lines += [f"note: {note}" for note in out["notes"]]
    return "\n".join(lines)


def handle(args):
    from driven_atom.cli import SAFETY_CAUTION, significant
    from driven_atom.lab import estimate

    out = significant(estimate(args.config, waist=args.waist, m2=args.m2, density=args.density,
                               pressure=args.pressure, temperature=args.temperature, length=args.length))
    if args.json:
        return {**out, "caution": SAFETY_CAUTION}
    print(table(out))
    print(SAFETY_CAUTION)
    return None
