"""``driven-atom estimate [CONFIG] [--species S --wavelength L --pulse-energy E --fwhm T --waist W
--pressure P --temperature T --length L ...] [--table CAMPAIGN] [--check] [--plot FILE] [--json]``:
the lab estimate (:mod:`driven_atom.lab`) from a ``[lab]`` table or flags (they override it), or a
run configuration's atom and pulse.

Prints a report (or one JSON object: the keys of :func:`driven_atom.lab.estimate`); the caution
that the numbers call for ends the report (stderr with ``--json``, and the ``caution`` field).
"""
from __future__ import annotations

import sys

# flag -> (help, metavar)
_FLAGS = {
    "species": ("atom or ion: H, D, T, He+, Li2+, ...", "NAME"),
    "state": ('initial state, e.g. "1s" (default), "2s", "2p1"', "LABEL"),
    "wavelength": ('vacuum wavelength, e.g. "243.1 nm"', "Q"),
    "photon_energy": ('photon energy instead, e.g. "10.2 eV"', "Q"),
    "pulse_energy": ('energy per pulse, e.g. "2 mJ"', "Q"),
    "power": ('average power (with --rep-rate), e.g. "1.5 W"', "Q"),
    "rep_rate": ('repetition rate, e.g. "10 Hz"', "Q"),
    "intensity": ('peak intensity instead of an energy, e.g. "1e12 W/cm^2"', "Q"),
    "shape": ("temporal profile: gaussian (default) | sech2", "SHAPE"),
    "fwhm": ('intensity FWHM of the pulse, e.g. "5 ns"', "Q"),
    "field_fwhm": ("FWHM of the field envelope instead", "Q"),
    "rms": ("rms width of the intensity instead", "Q"),
    "field_rms": ("rms width of the field envelope instead", "Q"),
    "focus": ("focus profile: gaussian (default) | top-hat | sheet", "PROFILE"),
    "waist": ('1/e^2 intensity radius w0 of the focus, e.g. "50 um"', "Q"),
    "focus_fwhm": ("intensity FWHM diameter of the focal spot instead", "Q"),
    "beam_diameter": ("1/e^2 diameter of the collimated beam on the lens (with --focal-length)", "Q"),
    "focal_length": ("focal length of the lens", "Q"),
    "sheet_height": ("flat extent of a light sheet (--focus sheet)", "Q"),
    "m2": ("beam quality M^2 (default 1)", "M2"),
    "polarization": ("linear (default) | circular", "POL"),
    "density": ('atom density, e.g. "1e12 cm^-3"', "Q"),
    "pressure": ('gas pressure, any unit, e.g. "1e-6 Torr"', "Q"),
    "temperature": ('gas temperature (K, degC, degF; default 20 degC; "0 K": atoms at rest)', "Q"),
    "beam_flux": ('atomic-beam flux density, e.g. "1e14 cm^-2 s^-1" (with --beam-velocity)', "Q"),
    "beam_velocity": ('atomic-beam velocity, e.g. "2.5 km/s"', "Q"),
    "beam_divergence": ('full divergence of the atomic beam, e.g. "10 mrad" (its Doppler width)', "Q"),
    "length": ('interaction length along the laser, e.g. "3 mm"', "Q"),
    "volume": ('detection volume (a sphere at the focus), e.g. "1 mm^3"', "Q"),
    "linewidth": ('laser linewidth (FWHM) beyond the transform limit, e.g. "100 MHz"', "Q"),
}


def register(subparsers) -> None:
    from driven_atom.cli import add_common

    p = subparsers.add_parser(
        "estimate", help="lab estimate: excitation, ionisation, saturation and counts per shot",
        description="From the lab's numbers (flags, or the [lab] table of CONFIG; flags win), or a run "
                    "configuration's [atom] and [[pulse]]: which process dominates, the single-atom "
                    "probabilities at the focus centre, saturation, and the ions and excited atoms per shot "
                    "averaged over the focus. Quantities take units; the [lab] keys are the flag names with "
                    "underscores.")
    p.add_argument("config", metavar="CONFIG", nargs="?", default=None,
                   help="a TOML file with a [lab] table, or a run configuration ([solver] not needed)")
    for key, (text, metavar) in _FLAGS.items():
        p.add_argument(f"--{key.replace('_', '-')}", dest=key, default=None, metavar=metavar, help=text)
    p.add_argument("--table", default=None, metavar="CAMPAIGN",
                   help="take the single-atom yields from a collected campaign (intensity, and wavelength "
                        "if scanned) instead of the formulas")
    p.add_argument("--check", action="store_true",
                   help="also run one short job at the peak intensity with the route the regime calls for "
                        "and print both numbers")
    p.add_argument("--plot", default=None, metavar="FILE",
                   help="draw the yield against the pulse energy (log-log) into FILE (.png, .pdf, .svg)")
    add_common(p)
    p.set_defaults(handler=handle)


def _g(value) -> str:
    return "-" if value is None else f"{value:.4g}"


def report(out: dict) -> str:
    """The estimate as a few lines of text."""
    inputs = out.get("inputs", {})
    lines = [f"{out['species']} {out['state']}: ionisation potential {out['ionization_potential_eV']:.6g} eV"]
    if "wavelength_nm" in inputs:
        lines[0] += f"; laser {inputs['wavelength_nm']:.6g} nm ({inputs['photon_energy_eV']:.5g} eV)"
    lines.append(f"regime: {out['regime']}")
    lines.append(f"  method: {out['method']}")
    lines.append(f"  why: {out['why']}")
    lines.append(f"  how sure: {out['accuracy']}")
    if out.get("peak_intensity_Wcm2") is not None:
        lines.append(f"peak intensity {_g(out['peak_intensity_Wcm2'])} W/cm^2, Keldysh gamma {_g(out['keldysh'])}, "
                     f"Up {_g(out['ponderomotive_eV'])} eV")
    if out.get("pulse_energy_J") is not None:
        text = f"pulse energy {_g(out['pulse_energy_J'])} J, peak power {_g(out['peak_power_W'])} W"
        if out.get("peak_fluence_Jcm2") is not None:
            text += f", peak fluence {_g(out['peak_fluence_Jcm2'])} J/cm^2"
        if out.get("rayleigh_length_m") is not None:
            text += f", Rayleigh length {_g(out['rayleigh_length_m'])} m"
        lines.append(text)
    res = out.get("resonance")
    if res:
        lines.append(f"resonance {res['line']} ({res['photons']} photon{'s' if res['photons'] > 1 else ''}): "
                     f"detuning {res['detuning_GHz']:+.4g} GHz ({res['detuning_nm']:+.3g} nm), Rabi frequency "
                     f"{_g(res['rabi_frequency_GHz'])} GHz, pulse area {_g(res['pulse_area_rad'])} rad")
        text = (f"  widths (FWHM): Doppler {_g(res['doppler_fwhm_GHz'])} GHz, laser {_g(res['laser_linewidth_GHz'])} "
                f"GHz, Fourier {_g(res['fourier_width_GHz'])} GHz, natural {_g(res['natural_width_GHz'])} GHz")
        if res.get("light_shift_GHz") is not None:
            text += f"; light shift {res['light_shift_GHz']:+.4g} GHz at the peak"
        lines.append(text)
        lines.append(f"  {res['upper']} ionised by {res['ionized_by']}: {_g(res['ionization_rate_peak_s'])} /s at the peak")
    atom = f"one atom at the focus centre: ionised {_g(out['probability_peak'])}"
    if out.get("excitation_peak") is not None:
        atom += f", excited after the pulse {_g(out['excitation_peak'])}"
    lines.append(atom)
    for name, alt in (out.get("alternatives") or {}).items():
        lines.append(f"  ({name} would give {_g(alt['probability_peak'])})")
    if out.get("saturation_intensity_Wcm2") is not None:
        lines.append(f"saturation intensity {_g(out['saturation_intensity_Wcm2'])} W/cm^2 (P = 1 - 1/e)")
    if out.get("saturation"):
        lines.append(out["saturation"])
    if out.get("ions_per_shot") is not None:
        lines.append(f"per shot (gas {_g(inputs.get('density_cm3'))} cm^-3): {_g(out['atoms_in_volume'])} atoms in "
                     f"the beam, {_g(out['ions_per_shot'])} ions "
                     f"(ionised fraction in the beam {_g(out['fraction_volume_averaged'])})"
                     + (f", {_g(out['excited_per_shot'])} excited (fraction in the beam "
                        f"{_g(out.get('excited_fraction_volume_averaged'))})"
                        if out.get("excited_per_shot") is not None else ""))
        if out.get("ions_per_second") is not None:
            lines.append(f"  {_g(out['ions_per_second'])} ions per second")
    if out.get("slope") is not None:
        lines.append(f"local slope d ln(yield)/d ln(pulse energy) = {out['slope']:.3g}")
    check = out.get("check")
    if check:
        lines.append(f"check with the {check['route']} route ({check['pulse']}): {check['comparison']}")
    given = inputs.get("given", {})
    if given:
        echo = []
        for key, value in given.items():
            converted = next(((k, inputs[k]) for k in inputs if k.startswith(key + "_") and k != "duration_given_as"),
                             None)
            if converted is not None and isinstance(value, str) and isinstance(converted[1], float):
                unit = converted[0][len(key) + 1:].replace("cm3", "cm^-3").replace("cm2s", "cm^-2 s^-1").replace("ms", "m/s")
                echo.append(f"{key} {value} = {converted[1]:.10g} {unit}")
            else:
                echo.append(f"{key} {value}")
        lines.append("inputs: " + "; ".join(echo))
    lines += [f"warning: {w}" for w in out.get("warnings", [])]
    lines += [f"note: {n}" for n in out.get("notes", [])]
    if out.get("caution"):
        lines.append(out["caution"])
    return "\n".join(lines)


def handle(args):
    from driven_atom.cli import significant
    from driven_atom.lab import estimate

    keys = {key: getattr(args, key) for key in _FLAGS}
    if keys["m2"] is not None:
        try:
            keys["m2"] = float(keys["m2"])
        except ValueError:
            from driven_atom.errors import InputError

            raise InputError(f"`--m2` must be a plain number >= 1, got {keys['m2']!r}") from None
    if args.plot is not None:
        from driven_atom.plotting import figure_format

        figure_format(args.plot)                       # a bad suffix stops before any work
    out = estimate(args.config, table=args.table, check=args.check, curve=args.plot is not None, **keys)
    if args.plot is not None:
        from driven_atom.plotting import yield_figure

        yield_figure(out, args.plot)
        out.pop("curve", None)
        out["plot"] = str(args.plot)
    out = significant(out)
    if args.json:
        if out.get("caution"):
            sys.stderr.write(out["caution"] + "\n")
        return out
    print(report(out))
    return None
