"""``driven-atom lines | transition | state | xsec``: the hydrogenic atom as tables.

Thin: parse, call :mod:`driven_atom.atom.tables`, print. Nothing heavy is imported until a handler runs
(no numba, qutip or pint; pint only when ``xsec`` parses a quantity).
"""
from __future__ import annotations


STRUCTURE_HELP = ("level structure: bohr (reduced-mass Bohr levels, the default), fine (Dirac energies with "
                  "recoil and the Lamb shift) or hyperfine (also the magnetic hyperfine structure)")


def _add_structure(parser) -> None:
    parser.add_argument("--structure", choices=("bohr", "fine", "hyperfine"), default="bohr", help=STRUCTURE_HELP)


def register(subparsers) -> None:
    from driven_atom.cli import add_atom_options, add_common

    p = subparsers.add_parser("lines", help="series lines: vacuum and air wavelengths, energies",
                              description="Lines n -> lower of one series, with the series limit.")
    p.add_argument("--series", default="balmer",
                   help="lyman, balmer, paschen, brackett, pfund, humphreys or a lower level n (default balmer)")
    p.add_argument("--upto", type=int, default=None, help="highest upper level n (default: lower + 5)")
    _add_structure(p)
    add_atom_options(p)
    add_common(p)
    p.set_defaults(handler=handle_lines)

    p = subparsers.add_parser("transition", help="energy, wavelength, dipole, f-value, Einstein A of a transition",
                              description="One transition between two states, given in either order.")
    p.add_argument("state_a", metavar="A", help='a state label, e.g. "2p" (or "2p3/2", "1s1/2 F=1" with --structure)')
    p.add_argument("state_b", metavar="B", help='a state label, e.g. "1s"')
    _add_structure(p)
    add_atom_options(p)
    add_common(p)
    p.set_defaults(handler=handle_transition)

    p = subparsers.add_parser("state", help="energy, binding energy, lifetime, <r> of one state",
                              description="One bound level of the atom.")
    p.add_argument("state", metavar="S", help='a state label, e.g. "3d" (or "3d5/2", "2s1/2 F=0" with --structure)')
    _add_structure(p)
    add_atom_options(p)
    add_common(p)
    p.set_defaults(handler=handle_state)

    p = subparsers.add_parser("xsec", help="photoionisation cross section of a level",
                              description="Photoionisation cross section (exact hydrogenic, m-averaged).")
    p.add_argument("state", metavar="STATE", help='a level label, e.g. "1s" or "3d"')
    p.add_argument("--photon-energy", default=None, help='photon energy, e.g. "20 eV" (plain number: hartree)')
    p.add_argument("--wavelength", default=None, help='photon wavelength, e.g. "50 nm" (plain number: bohr)')
    p.add_argument("--range", dest="energy_range", default=None, metavar="START:STOP:POINTS",
                   help='photon energies evenly spaced, e.g. "14 eV:100 eV:50"')
    add_atom_options(p)
    add_common(p)
    p.set_defaults(handler=handle_xsec)


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


def handle_lines(args):
    from driven_atom.atom.tables import lines

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


def handle_transition(args):
    from driven_atom.atom.tables import transition

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

    out = xsec(args.state, args.photon_energy, wavelength=args.wavelength, energy_range=args.energy_range,
               Z=args.Z, nucleus=args.nucleus)
    if args.json:
        return out
    title = f"photoionisation of {args.state} ({_atom_label(args)}), m-averaged"
    if isinstance(out["sigma_cm2"], list):
        rows = [[f"{e:.4f}", f"{s:.5g}", f"{m:.5g}"]
                for e, s, m in zip(out["photon_energy_eV"], out["sigma_cm2"], out["sigma_Mb"])]
        print(title)
        print(_grid(["photon energy [eV]", "sigma [cm^2]", "sigma [Mb]"], rows))
    else:
        print(_pairs(title, [("photon energy", f"{out['photon_energy_eV']:.6g} eV"),
                             ("sigma", f"{out['sigma_cm2']:.5g} cm^2 = {out['sigma_Mb']:.5g} Mb")]))
    return None
