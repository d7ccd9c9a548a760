"""``driven-atom lines | transition | state | xsec``: the hydrogenic atom as tables.

Thin: parse, call :mod:`driven_atom.atom.tables`, print. Nothing heavy is imported until a handler runs
(no numba, qutip or pint; pint only when ``xsec`` parses a quantity).
"""
from __future__ import annotations


STRUCTURE_HELP = ("level structure: bohr (reduced-mass Bohr levels, the default), fine (Dirac energies with "
                  "recoil and the Lamb shift) or hyperfine (also the magnetic hyperfine structure)")


def _add_atom_flags(parser, *, structure: bool) -> None:
    """The atom's options every atom command takes (and ``--structure`` where it applies)."""
    from driven_atom.cli import add_atom_options, add_common

    if structure:
        parser.add_argument("--structure", choices=("bohr", "fine", "hyperfine"), default="bohr",
                            help=STRUCTURE_HELP)
    add_atom_options(parser)
    add_common(parser)
    _add_species(parser)


def register(subparsers) -> None:
    p = subparsers.add_parser("lines", help="series lines: vacuum and air wavelengths, energies",
                              description="Lines n -> lower of one series, with the series limit.")
    p.add_argument("--series", default="balmer",
                   help="lyman, balmer, paschen, brackett, pfund, humphreys or a lower level n (default balmer)")
    p.add_argument("--upto", type=int, default=None, help="highest upper level n (default: lower + 5)")
    _add_atom_flags(p, structure=True)
    p.set_defaults(handler=handle_lines)

    p = subparsers.add_parser("transition", help="energy, wavelength, dipole, f-value, Einstein A of a transition",
                              description="One transition between two states, given in either order.")
    p.add_argument("state_a", metavar="A", help='a state label, e.g. "2p" (or "2p3/2", "1s1/2 F=1" with --structure)')
    p.add_argument("state_b", metavar="B", help='a state label, e.g. "1s"')
    _add_atom_flags(p, structure=True)
    p.set_defaults(handler=handle_transition)

    p = subparsers.add_parser("state", help="energy, binding energy, lifetime, <r> of one state",
                              description="One bound level of the atom.")
    p.add_argument("state", metavar="S", help='a state label, e.g. "3d" (or "3d5/2", "2s1/2 F=0" with --structure)')
    _add_atom_flags(p, structure=True)
    p.set_defaults(handler=handle_state)

    p = subparsers.add_parser("xsec", help="photoionisation cross section of a level",
                              description="Photoionisation cross section (exact hydrogenic, m-averaged).")
    p.add_argument("state", metavar="STATE", help='a level label, e.g. "1s" or "3d"')
    p.add_argument("--photon-energy", default=None, help='photon energy, e.g. "20 eV" (plain number: hartree)')
    p.add_argument("--wavelength", default=None, help='photon wavelength, e.g. "50 nm" (plain number: bohr)')
    p.add_argument("--range", dest="energy_range", default=None, metavar="START:STOP:POINTS",
                   help='photon energies evenly spaced, e.g. "14 eV:100 eV:50"')
    _add_atom_flags(p, structure=False)
    p.set_defaults(handler=handle_xsec)


def _add_species(parser) -> None:
    parser.add_argument("--species", default=None,
                        help="a single-active-electron model atom: He, Ne, Ar, Kr, Xe, Li, Na, K, Rb, Cs "
                             "(levels from the model, measured levels beside them)")


def _num(value, fmt: str) -> str:
    return "-" if value is None else fmt.format(value)


def _grid(head: list[str], rows: list[list[str]]) -> str:
    widths = [max(len(r[j]) for r in [head, *rows]) for j in range(len(head))]
    return "\n".join("  ".join(cell.rjust(w) for cell, w in zip(r, widths)) for r in [head, *rows])


def _pairs(title: str, items: list[tuple[str, str]]) -> str:
    width = max(len(k) for k, _ in items)
    return "\n".join([title, *(f"  {k.ljust(width)}  {v}" for k, v in items)])


def _atom_label(args) -> str:
    from driven_atom.atom.tables import resolve_atom

    atom = resolve_atom(args.Z, args.nucleus)
    mass = "infinite nuclear mass" if atom.nuclear_mass == float("inf") else f"mu = {atom.reduced_mass:.10g} m_e"
    return f"Z = {atom.Z}, {mass}"


def _model_only(args, *keys) -> None:
    from driven_atom.errors import InputError

    for key in keys:
        if getattr(args, key, None) not in (None, "bohr"):
            raise InputError(f"`--{key}` does not apply with `--species` (a model atom has its own potential)")


def handle_lines(args):
    from driven_atom.atom.tables import lines

    if args.species is not None:
        return _model_lines(args)

    out = lines(args.series, args.upto, Z=args.Z, nucleus=args.nucleus, structure=args.structure)
    if args.json:
        return out
    if args.structure != "bohr":
        rows = [[f"{ln['upper']} -> {ln['lower']}", _num(ln["vacuum_nm"], "{:.6f}"), _num(ln["air_nm"], "{:.6f}"),
                 _num(ln["energy_eV"], "{:.8f}"), _num(ln["A_s"], "{:.5g}")] for ln in out["lines"]]
        print(f"{args.structure}-structure components ({_atom_label(args)}); air: Edlen 1966 (200 nm - 2 um)")
        print(_grid(["component", "vacuum [nm]", "air [nm]", "energy [eV]", "A [1/s]"], rows))
        print(f"series limit (vacuum): {out['limit_vacuum_nm']:.6f} nm")
        return None
    rows = [[f"{ln['upper']} -> {ln['lower']}", _num(ln["vacuum_nm"], "{:.4f}"), _num(ln["air_nm"], "{:.4f}"),
             _num(ln["energy_eV"], "{:.6f}"), _num(ln["wavenumber_cm"], "{:.3f}")] for ln in out["lines"]]
    print(f"series lines ({_atom_label(args)}); nonrelativistic, air: Edlen 1966 (200 nm - 2 um)")
    print(_grid(["transition", "vacuum [nm]", "air [nm]", "energy [eV]", "wavenumber [1/cm]"], rows))
    print(f"series limit (vacuum): {out['limit_vacuum_nm']:.4f} nm")
    return None


def _model_lines(args):
    from driven_atom.basis.model_tables import lines

    _model_only(args, "Z", "nucleus", "structure")
    out = lines(args.species, args.upto)
    if args.json:
        return out
    rows = [[f"{ln['upper']} -> {ln['lower']}", _num(ln["vacuum_nm"], "{:.3f}"), _num(ln.get("measured_vacuum_nm"), "{:.3f}"),
             _num(ln["f_absorption"], "{:.4g}"), _num(ln["A_s"], "{:.4g}")] for ln in out["lines"]]
    print(f"lines from the ground level of the {args.species} model (measured: NIST ASD)")
    print(_grid(["transition", "model [nm]", "measured [nm]", "f", "A [1/s]"], rows))
    print(f"series limit: {out['limit_vacuum_nm']:.3f} nm (Ip {out['ionization_potential_eV']:.4f} eV; measured "
          f"{out['measured_ionization_potential_eV']:.4f} eV)")
    return None


def handle_transition(args):
    from driven_atom.atom.tables import transition

    if args.species is not None:
        from driven_atom.basis.model_tables import transition as model_transition

        _model_only(args, "Z", "nucleus", "structure")
        out = model_transition(args.species, args.state_a, args.state_b)
        if args.json:
            return out
        items = [("photon energy", _num(out["energy_eV"], "{:.6f} eV")),
                 ("vacuum wavelength", _num(out["vacuum_nm"], "{:.4f} nm")),
                 ("measured (NIST ASD)", _num(out.get("measured_vacuum_nm"), "{:.4f} nm")),
                 ("radial dipole", _num(out["radial_dipole_au"], "{:.6g} bohr")),
                 ("f (absorption)", _num(out["f_absorption"], "{:.6g}")),
                 ("Einstein A", _num(out["A_s"], "{:.6g} 1/s"))]
        items += [(f"{c['upper']} -> {c['lower']}", f"{c['vacuum_nm']:.4f} nm (measured "
                   f"{_num(c.get('measured_vacuum_nm'), '{:.4f}')} nm), A {c['A_s']:.4g} 1/s")
                  for c in out.get("components", [])]
        print(_pairs(f"transition {out['upper']} -> {out['lower']} ({args.species} model)", items))
        return None

    out = transition(args.state_a, args.state_b, Z=args.Z, nucleus=args.nucleus, structure=args.structure)
    if args.json:
        return out
    items = [("photon energy", _num(out["energy_eV"], "{:.6f} eV")),
             ("vacuum wavelength", _num(out["vacuum_nm"], "{:.4f} nm")),
             ("air wavelength", _num(out["air_nm"], "{:.4f} nm")),
             ("radial dipole", _num(out["radial_dipole_au"], "{:.6g} bohr")),
             ("f (absorption)", _num(out["f_absorption"], "{:.6g}")),
             ("Einstein A", _num(out["A_s"], "{:.6g} 1/s"))]
    if args.structure != "bohr":
        items[1:1] = [("frequency", _num(out["frequency_GHz"], "{:.9g} GHz"))]
        items.insert(-2, ("line strength", _num(out["line_strength_au"], "{:.6g} bohr^2")))
    title = (f"transition {args.state_a} - {args.state_b}" if args.structure == "bohr" else
             f"transition {out['upper']} -> {out['lower']}, {args.structure} structure")
    print(_pairs(f"{title} ({_atom_label(args)})", items))
    if out["f_absorption"] == 0.0 and out["energy_eV"] > 0:
        print("  (electric-dipole forbidden: l must change by 1)")
    return None


def handle_state(args):
    from driven_atom.atom.tables import state

    if args.species is not None:
        from driven_atom.basis.model_tables import state as model_state

        _model_only(args, "Z", "nucleus", "structure")
        out = model_state(args.species, args.state)
        if args.json:
            return out
        items = [("energy", f"{out['energy_eV']:.6f} eV"), ("binding energy", f"{out['binding_eV']:.6f} eV"),
                 ("excitation", f"{out['excitation_eV']:.6f} eV")]
        if "measured_excitation_eV" in out:
            items.append(("measured (NIST ASD)", f"{out['measured_excitation_eV']:.6f} eV above the ground state, "
                                                 f"model - measured {out['deviation_eV']:+.5f} eV"))
        items += [(f"j = {j}", f"{e:.6f} eV above the ground state") for j, e in out.get("fine", {}).items()]
        items += [("radiative lifetime", _num(out["lifetime_s"], "{:.6g} s")), ("<r>", f"{out['r_mean_au']:.6g} bohr")]
        print(_pairs(f"state {out['label']} ({args.species} model)", items))
        return None

    out = state(args.state, Z=args.Z, nucleus=args.nucleus, structure=args.structure)
    if args.json:
        return out
    lifetime = ("no electric-dipole decay" if out["lifetime_s"] is None and "note" not in out
                else out.get("note", "") if out["lifetime_s"] is None else f"{out['lifetime_s']:.6g} s")
    digits = 6 if args.structure == "bohr" else 12
    items = [("energy", f"{out['energy_eV']:.{digits}f} eV"), ("binding energy", f"{out['binding_eV']:.{digits}f} eV"),
             ("radiative lifetime", lifetime), ("<r>", f"{out['r_mean_au']:.6g} bohr")]
    if "g_factor" in out:
        items.append(("g factor", f"{out['g_factor']:.6f}"))
    name = args.state if args.structure == "bohr" else f"{out['label']}, {args.structure} structure"
    print(_pairs(f"state {name} ({_atom_label(args)})", items))
    return None


def handle_xsec(args):
    from driven_atom.atom.tables import xsec

    if args.species is not None:
        from driven_atom.atom.tables import _photon_energies
        from driven_atom.basis.model_tables import xsec as model_xsec

        _model_only(args, "Z", "nucleus")
        out = model_xsec(args.species, args.state, _photon_energies(args.photon_energy, args.wavelength,
                                                                    args.energy_range))
    else:
        out = xsec(args.state, args.photon_energy, wavelength=args.wavelength, energy_range=args.energy_range,
                   Z=args.Z, nucleus=args.nucleus)
    if args.json:
        return out
    what = f"{args.species} model" if args.species is not None else _atom_label(args)
    title = f"photoionisation of {args.state} ({what}), m-averaged"
    if isinstance(out["sigma_cm2"], list):
        rows = [[f"{e:.4f}", f"{s:.5g}", f"{m:.5g}"]
                for e, s, m in zip(out["photon_energy_eV"], out["sigma_cm2"], out["sigma_Mb"])]
        print(title)
        print(_grid(["photon energy [eV]", "sigma [cm^2]", "sigma [Mb]"], rows))
    else:
        print(_pairs(title, [("photon energy", f"{out['photon_energy_eV']:.6g} eV"),
                             ("sigma", f"{out['sigma_cm2']:.5g} cm^2 = {out['sigma_Mb']:.5g} Mb")]))
    return None
