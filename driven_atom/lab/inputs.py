"""The lab's own numbers, from a ``[lab]`` table, command-line flags (the same names with dashes:
``pulse_energy`` ↔ ``--pulse-energy``) or a run configuration's ``[atom]`` and ``[[pulse]]``;
checked, converted (SI for the macroscopic quantities, atomic units for the photon) and echoed.

Precedence: a run configuration's atom and pulse < its ``[lab]`` table < flags (keyword arguments).
Within one source the keys of a group exclude each other; a later source that sets any key of a
group replaces the whole group (``--pulse-energy`` replaces a configured ``intensity``):

* colour: ``wavelength`` | ``photon_energy``;
* pulse: ``pulse_energy`` | ``power`` (with ``rep_rate``) | ``intensity`` (the peak);
* duration: ``fwhm`` | ``field_fwhm`` | ``rms`` | ``field_rms`` (of the intensity, or of the field
  envelope), with ``shape`` gaussian | sech2;
* focus: ``waist`` (1/e² intensity radius) | ``focus_fwhm`` (spot FWHM diameter) | ``beam_diameter``
  with ``focal_length`` (collimated 1/e² diameter on the lens), with ``m2`` and ``focus``
  gaussian | top-hat | sheet (``sheet_height``);
* gas: ``density`` | ``pressure`` (with ``temperature``, default 20 °C) | ``beam_flux`` with
  ``beam_velocity`` (an atomic beam: n = flux/velocity; ``beam_divergence`` sets its Doppler width);
  ``temperature`` also sets the Doppler width of a gas ("0 K": atoms at rest);
* region: ``length`` (along the laser) | ``volume`` (a detection sphere at the focus).

>>> case = lab_case(lab={"species": "H", "wavelength": "121.5684 nm", "intensity": "1e8 W/cm^2",
...                      "fwhm": "2 ns", "temperature": "300 K"})
>>> case.state.label, round(case.inputs["wavelength_nm"], 4), case.inputs["temperature_K"]
('1s0', 121.5684, 300.0)
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, ValidationError, field_validator, model_validator

from driven_atom.errors import InputError, short, validation_message
from driven_atom.quantities import LabQuantity, Number
from driven_atom.units import BOLTZMANN_JK, SPEED_OF_LIGHT_MS, UnitError, convert

# group -> its alternatives (keys that go together); one alternative per source
ALTERNATIVES = {
    "colour": (("wavelength",), ("photon_energy",)),
    "pulse": (("pulse_energy",), ("power",), ("intensity",)),
    "duration": (("fwhm",), ("field_fwhm",), ("rms",), ("field_rms",)),
    "focus": (("waist",), ("focus_fwhm",), ("beam_diameter", "focal_length")),
    "gas": (("density",), ("pressure",), ("beam_flux", "beam_velocity", "beam_divergence")),
    "region": (("length",), ("volume",)),
}
GROUPS = {group: tuple(k for alt in alts for k in alt) for group, alts in ALTERNATIVES.items()}
ROOM_TEMPERATURE_K = 293.15


def _photon_energy(value):
    if isinstance(value, bool) or not isinstance(value, str):
        raise ValueError("needs units, e.g. \"10.2 eV\" (or a frequency or wavenumber)")
    try:
        x = convert(value, "energy")
    except UnitError as exc:
        raise ValueError(str(exc)) from None
    if not x > 0:
        raise ValueError("must be > 0 eV")
    return x


PhotonEnergy = Annotated[float, BeforeValidator(_photon_energy)]


class LabInput(BaseModel):
    """The ``[lab]`` table (and the flags of ``driven-atom estimate``): every key documented once."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    species: str | None = Field(None, description="atom or ion: H, D, T, He+, Li2+, ... (the nucleus names "
                                "of the atom layer), or a model atom He, Ne, Ar, Kr, Xe, Li, Na, K, Rb, Cs")
    state: str | None = Field(None, description="initial state, e.g. \"1s\" or \"2p0\" (default 1s; m = 0 "
                              "unless given)")
    wavelength: LabQuantity("length", gt=0) | None = Field(None, description="vacuum wavelength of the laser")
    photon_energy: PhotonEnergy | None = Field(None, description="photon energy (eV, or a frequency or "
                                               "wavenumber) instead of the wavelength")
    pulse_energy: LabQuantity("energy", gt=0) | None = Field(None, description="energy of one pulse")
    power: LabQuantity("power", gt=0) | None = Field(None, description="average power (with `rep_rate`)")
    rep_rate: LabQuantity("frequency", gt=0) | None = Field(None, description="repetition rate")
    intensity: LabQuantity("intensity", gt=0) | None = Field(None, description="peak intensity at the focus "
                                                           "centre instead of the pulse energy")
    shape: Literal["gaussian", "sech2"] = Field("gaussian", description="temporal profile of the intensity")
    fwhm: LabQuantity("time", gt=0) | None = Field(None, description="intensity FWHM of the pulse")
    field_fwhm: LabQuantity("time", gt=0) | None = Field(None, description="FWHM of the field envelope")
    rms: LabQuantity("time", gt=0) | None = Field(None, description="rms width of the intensity profile")
    field_rms: LabQuantity("time", gt=0) | None = Field(None, description="rms width of the field envelope")
    focus: Literal["gaussian", "top-hat", "sheet"] = Field("gaussian", description="focus profile")
    waist: LabQuantity("length", gt=0) | None = Field(None, description="1/e² intensity radius w0 (top-hat: "
                                                      "radius; sheet: half-thickness)")
    focus_fwhm: LabQuantity("length", gt=0) | None = Field(None, description="intensity FWHM diameter of "
                                                           "the focal spot")
    beam_diameter: LabQuantity("length", gt=0) | None = Field(None, description="1/e² diameter of the "
                                                              "collimated beam on the lens")
    focal_length: LabQuantity("length", gt=0) | None = Field(None, description="focal length of the lens")
    sheet_height: LabQuantity("length", gt=0) | None = Field(None, description="flat extent of a light sheet")
    m2: Number(ge=1, lt=100) = Field(1.0, description="beam quality factor M² (1 <= M² < 100)")
    polarization: Literal["linear", "circular", "circular+", "circular-"] = Field(
        "linear", description="linear, or circular (circular+ = circular: drives Δm = +1)")
    density: LabQuantity("density", gt=0) | None = Field(None, description="number density of the atoms")
    pressure: LabQuantity("pressure", gt=0) | None = Field(None, description="gas pressure (any pressure unit)")
    temperature: LabQuantity("temperature", ge=0) | None = Field(None, description="gas temperature (K, "
                                                                 "degC, degF; 0 K: atoms at rest)")
    beam_flux: LabQuantity("flux", gt=0) | None = Field(None, description="atomic-beam flux density (atoms per "
                                                        "area and time)")
    beam_velocity: LabQuantity("velocity", gt=0) | None = Field(None, description="atomic-beam velocity")
    beam_divergence: LabQuantity("angle", gt=0, le=math.pi) | None = Field(
        None, description="full divergence (FWHM) of an atomic beam crossing the laser at right angles")
    length: LabQuantity("length", gt=0) | None = Field(None, description="interaction length along the laser")
    volume: LabQuantity("volume", gt=0) | None = Field(None, description="detection volume (a sphere at the focus)")
    linewidth: LabQuantity("frequency", ge=0) | None = Field(None, description="laser linewidth (FWHM) beyond "
                                                             "the transform limit")

    @field_validator("species")
    @classmethod
    def _species(cls, value):
        from driven_atom.atom import Atom
        from driven_atom.atom.model_atoms import species_names
        from driven_atom.atom.species import NUCLEI

        if value is None or value in species_names():
            return value
        try:
            Atom.from_name(value)
        except InputError:
            names = [n for n in NUCLEI if n != "infinite"] + ["He+", "Li2+", "Be3+", "..."] + species_names()
            raise ValueError(f"`species` must be a hydrogen-like atom or ion ({', '.join(names)}), "
                             f"got {short(repr(value))}") from None
        return value

    @field_validator("state")
    @classmethod
    def _state(cls, value):
        from driven_atom.atom import parse_state

        if value is not None:
            parse_state(value, name="state")
        return value

    @model_validator(mode="after")
    def _fit_together(self):
        for group, alternatives in ALTERNATIVES.items():
            given = [k for alt in alternatives for k in alt if getattr(self, k) is not None]
            if given and not any(set(given) <= set(alt) for alt in alternatives):
                other = next(k for k in given[1:] if not any({given[0], k} <= set(alt) for alt in alternatives))
                raise ValueError(f"`{given[0]}` and `{other}` exclude each other; give one")
        if self.power is not None and self.rep_rate is None:
            raise ValueError("`power` (average) needs `rep_rate`")
        if (self.beam_diameter is None) != (self.focal_length is None):
            raise ValueError("`beam_diameter` and `focal_length` go together (the focus of a collimated beam)")
        if (self.beam_flux is None) != (self.beam_velocity is None):
            raise ValueError("`beam_flux` and `beam_velocity` go together (n = flux/velocity)")
        return self


class EstimateConfig(BaseModel):
    """A file for ``driven-atom estimate``: a ``[lab]`` table, or a run configuration (``[atom]``,
    ``[[pulse]]``; its ``[solver]`` is checked but not needed)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    atom: dict[str, Any] | None = None
    fields: dict[str, Any] | None = None
    pulse: list[dict[str, Any]] = Field(default_factory=list)
    solver: dict[str, Any] | None = None
    output: dict[str, Any] | None = None
    scan: dict[str, Any] | None = None
    cluster: dict[str, Any] | None = None
    lab: dict[str, Any] | None = None


@dataclass
class LabCase:
    """Every input resolved: SI for the lab, atomic units for the atom and the photon."""

    atom: object
    species: str
    state: object
    photon_energy: float                     # hartree
    envelope: object                         # temporal.Envelope (s)
    peak_intensity: float                    # W/m²
    polarization: str                        # linear | circular+ | circular-
    pulse_energy: float | None = None        # J
    rep_rate: float | None = None            # Hz
    focus: object = None                     # focus.Focus or None
    density: float | None = None             # m⁻³
    temperature: float = ROOM_TEMPERATURE_K  # K
    doppler_fwhm: float = 0.0                # angular frequency FWHM at the laser frequency (rad/s)
    length: float | None = None              # m
    volume: float | None = None              # m³
    linewidth: float = 0.0                   # Hz (FWHM)
    static: object = None                    # a run configuration's static-field pulse
    inputs: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    warnings: list = field(default_factory=list)


# -- reading -----------------------------------------------------------------------------------------
def read_source(config) -> dict:
    """The tables of ``config`` (a TOML path or a dict; None: no file)."""
    if config is None:
        return {}
    if isinstance(config, (str, Path)):
        import tomllib

        from driven_atom.io import read_regular_text

        text = read_regular_text(config, what="config file")
        try:
            return tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            raise InputError(f"config file {short(str(config))!r} is not valid TOML: {exc}") from None
        except RecursionError:
            raise InputError(f"config file {short(str(config))!r} nests tables too deeply") from None
    if isinstance(config, dict):
        return config
    if hasattr(config, "to_dict"):                         # a RunConfig
        return config.to_dict()
    raise InputError(f"config must be a path or a dict, got {type(config).__name__}")


def _merge(table: dict, flags: dict) -> dict:
    """``table`` updated by ``flags`` (None values dropped); a flag of a group replaces the group."""
    merged = dict(table)
    for group in GROUPS.values():
        if any(flags.get(k) is not None for k in group):
            for k in group:
                merged.pop(k, None)
    merged.update({k: v for k, v in flags.items() if v is not None})
    return merged


def _lab_input(table: dict, flags: dict) -> LabInput:
    merged = _merge(table, flags)
    try:
        return LabInput.model_validate(merged)
    except ValidationError as exc:
        err = max(exc.errors(), key=lambda e: len(e["loc"]))
        key = str(err["loc"][0]) if err["loc"] else ""
        message = validation_message(exc, model=LabInput)
        where = f"--{key.replace('_', '-')}" if key in flags and flags.get(key) is not None else f"lab.{key}"
        if key:
            message = message.replace(f"`{key}`", f"`{where}`", 1)
        raise InputError(message) from None


def lab_case(config=None, *, lab: dict | None = None, **flags) -> LabCase:
    """Read, merge and check every input (module docstring); ``lab`` is a ``[lab]`` table given
    directly, ``flags`` the command line's (or keyword arguments) by key name."""
    data = read_source(config)
    try:
        outer = EstimateConfig.model_validate(data)
    except ValidationError as exc:
        raise InputError(validation_message(exc, model=EstimateConfig)) from None
    table = dict(outer.lab or {})
    table.update(lab or {})
    given = _merge(table, flags)
    inputs = _lab_input(table, flags)
    run = _run_parts(outer) if (outer.atom is not None or outer.pulse) else {}
    return _resolve(inputs, run, given)


def _run_parts(outer: EstimateConfig) -> dict:
    """Atom, initial state and pulse component of a run configuration (its ``[solver]``, when
    present, is checked like a run's)."""
    from driven_atom.atom import State
    from driven_atom.config import AtomConfig, FieldsConfig, PulseConfig, config_message, read_settings
    from driven_atom.pulse import PulseComponent

    if outer.solver is not None:
        read_settings(outer.solver)
    try:
        atom_cfg = AtomConfig.model_validate(outer.atom or {})
        fields = FieldsConfig.model_validate(outer.fields or {})
        pulses = [PulseConfig.model_validate(p) for p in outer.pulse]
    except ValidationError as exc:
        raise InputError(config_message(exc)) from None
    initial = atom_cfg.initial_states()
    if len(initial) != 1:
        raise InputError("`atom.initial`: an estimate needs one initial state, not a superposition")
    state, notes = initial[0][0], []
    if not isinstance(state, State):                    # a fine- or hyperfine-structure component
        notes.append(f"initial {state.label}: the estimate uses the Bohr level {State(state.n, state.l).label} "
                     f"(no fine or hyperfine structure)")
        state = State(state.n, state.l, 0)
    if fields.any:
        notes.append("the static fields of [fields] are not in the estimate (run the levels route for them)")
    components = [PulseComponent.from_config(p, key=f"pulse.{i}") for i, p in enumerate(pulses)]
    return {"atom": atom_cfg.build_atom(), "nucleus": atom_cfg.nucleus, "state": state,
            "components": components, "notes": notes}


def _choose_component(components, notes: list):
    """The run configuration's pulse the estimate follows: the only one, or the strongest."""
    if not components:
        return None
    if len(components) > 1:
        best = max(range(len(components)), key=lambda i: components[i].intensity)
        notes.append(f"{len(components)} pulses in the configuration: the estimate follows pulse.{best}, "
                     f"the strongest (one laser at a time)")
        return components[best]
    return components[0]


def _resolve(lab: LabInput, run: dict, given: dict) -> LabCase:
    from driven_atom.atom import Atom, State, parse_state
    from driven_atom.lab.focus import Focus, waist_from_fwhm, waist_from_lens
    from driven_atom.lab.temporal import Envelope
    from driven_atom.units import (AU_INTENSITY_WM2, AU_TIME_S, photon_energy_to_wavelength_nm,
                                   wavelength_nm_to_photon_energy)

    notes: list = list(run.get("notes", []))
    warnings: list = []
    # the atom and its state
    if lab.species is not None:
        atom, species = _species_atom(lab.species), lab.species
    elif run.get("atom") is not None:
        atom = run["atom"]
        species = (atom.species if atom.model is not None
                   else run["nucleus"] if run["nucleus"] != "infinite" else f"Z={atom.Z}")
    else:
        raise InputError("`species` is required: the atom or ion, e.g. --species H (H, D, T, He+, Li2+, ...)")
    if lab.state is not None:
        state = parse_state(lab.state, name="state")
    elif atom.model is not None and lab.species is not None:
        state = atom.model.ground
    else:
        state = run.get("state") or (atom.model.ground if atom.model is not None else State(1, 0))
    polarization = {"circular": "circular+"}.get(lab.polarization, lab.polarization)
    component = _choose_component(run.get("components", []), notes)
    if component is not None and component.envelope_kind == "static":
        return _static_case(atom, species, state, component, lab, given, notes)
    if component is not None and "polarization" not in given:
        if component.polarization == "elliptical":
            raise InputError("`pulse.polarization` = \"elliptical\": the estimate takes linear or circular light")
        polarization = {"z": "linear", "x": "linear"}.get(component.polarization, component.polarization)
    if state.m is None:
        state = State(state.n, state.l, 0)
        if state.l > 0:
            notes.append(f"state {state.level.label}: the sublevel m = 0 is taken (give e.g. "
                         f"--state {state.level.label}1 for another)")
    # the photon
    if lab.wavelength is not None:
        omega = wavelength_nm_to_photon_energy(lab.wavelength * 1e9)
    elif lab.photon_energy is not None:
        omega = lab.photon_energy
    elif component is not None:
        omega = component.omega
    else:
        raise InputError("`wavelength` (or `photon_energy`) is required, e.g. --wavelength \"243 nm\"")
    if omega > 1.0:                             # X-rays: the run configuration's limit (dipole, one electron)
        from driven_atom.config import MAX_PHOTON_ENERGY_AU
        from driven_atom.units import HARTREE_EV

        if omega > MAX_PHOTON_ENERGY_AU:
            key = "wavelength" if lab.wavelength is not None else "photon_energy"
            raise InputError(f"`{key}`: photons above {MAX_PHOTON_ENERGY_AU * HARTREE_EV / 1e3:.3g} keV reach past "
                             f"the dipole approximation and the one-electron picture; got {omega * HARTREE_EV / 1e3:.3g} keV")
    # the pulse in time
    durations = [k for k in GROUPS["duration"] if getattr(lab, k) is not None]
    if durations:
        envelope = Envelope.from_duration(lab.shape, durations[0], getattr(lab, durations[0]))
    elif component is not None:
        envelope = Envelope.from_component(component, AU_TIME_S)
    else:
        raise InputError("`fwhm` (or `field_fwhm`, `rms`, `field_rms`) is required: the pulse duration")
    # the focus
    wavelength_m = photon_energy_to_wavelength_nm(omega) * 1e-9
    if lab.waist is not None:
        waist = lab.waist
    elif lab.focus_fwhm is not None:
        waist = waist_from_fwhm(lab.focus_fwhm)
    elif lab.beam_diameter is not None:
        waist = waist_from_lens(lab.beam_diameter, lab.focal_length, wavelength_m, lab.m2)
    else:
        waist = None
    focus = Focus(lab.focus, waist, wavelength_m, lab.m2, lab.sheet_height) if waist is not None else None
    # the energy and the peak intensity
    pulse_energy = lab.pulse_energy if lab.pulse_energy is not None else (
        lab.power / lab.rep_rate if lab.power is not None else None)
    if pulse_energy is not None:
        if focus is None:
            raise InputError("the pulse energy needs the focus: give `waist` (or `focus_fwhm`, or "
                             "`beam_diameter` with `focal_length`)")
        peak = envelope.peak_factor * pulse_energy / (focus.area * envelope.fwhm)
    elif lab.intensity is not None:
        peak = lab.intensity
    elif component is not None:
        peak = component.intensity * AU_INTENSITY_WM2
        if focus is not None:
            pulse_energy = peak * focus.area * envelope.integral(1.0)
    else:
        raise InputError("`pulse_energy` (or `power` with `rep_rate`, or the peak `intensity`) is required")
    if lab.intensity is not None and focus is not None:
        pulse_energy = peak * focus.area * envelope.integral(1.0)
    from driven_atom.pulse import MAX_INTENSITY_WCM2

    if peak * 1e-4 > MAX_INTENSITY_WCM2:
        key = next((k for k in ("pulse_energy", "power", "intensity") if getattr(lab, k) is not None), "intensity")
        raise InputError(f"`{key}`: the peak intensity {peak * 1e-4:.3g} W/cm^2 exceeds {MAX_INTENSITY_WCM2:.0e} "
                         f"W/cm^2, where the electron turns relativistic and the estimate's physics fails")
    # the gas
    temperature = lab.temperature if lab.temperature is not None else ROOM_TEMPERATURE_K
    density = None
    if lab.density is not None:
        density = lab.density
    elif lab.pressure is not None:
        if not temperature > 0:
            raise InputError("`temperature` must be > 0 K with `pressure` (n = p/(k_B T))")
        density = lab.pressure / (BOLTZMANN_JK * temperature)      # ideal gas
        if lab.temperature is None:
            notes.append(f"gas temperature not given: {ROOM_TEMPERATURE_K} K (20 degC) assumed")
    elif lab.beam_flux is not None:
        density = lab.beam_flux / lab.beam_velocity
    mass_kg = _atom_mass_kg(atom)
    if lab.beam_divergence is not None:
        if lab.beam_velocity is None:
            raise InputError("`beam_divergence` needs `beam_velocity` (the transverse velocity spread is v·θ)")
        doppler = omega / AU_TIME_S / SPEED_OF_LIGHT_MS * lab.beam_velocity * lab.beam_divergence
    else:
        # thermal gas: FWHM 2ω/c √(2 ln2 k_B T/m) (common practice)
        doppler = 2 * omega / AU_TIME_S / SPEED_OF_LIGHT_MS * math.sqrt(2 * math.log(2) * BOLTZMANN_JK
                                                                        * temperature / mass_kg)
        if lab.beam_flux is not None:
            notes.append("atomic beam without `beam_divergence`: the Doppler width is that of a gas at "
                         f"{temperature:g} K (an upper bound for a collimated beam)")
    if lab.volume is not None and focus is not None and focus.profile != "gaussian":
        raise InputError(f"`volume` (a detection sphere) needs focus = \"gaussian\"; for a {focus.profile} "
                         f"give `length`")
    case = LabCase(atom=atom, species=species, state=state, photon_energy=omega, envelope=envelope,
                   peak_intensity=peak, polarization=polarization, pulse_energy=pulse_energy,
                   rep_rate=lab.rep_rate, focus=focus, density=density, temperature=temperature,
                   doppler_fwhm=doppler, length=lab.length, volume=lab.volume,
                   linewidth=lab.linewidth or 0.0, notes=notes, warnings=warnings)
    case.inputs = _echo(case, lab, given, durations)
    return case


def _species_atom(name: str):
    """A model atom by species name (He, Ne, Ar, ...: the neutral atom), else a hydrogen-like atom or
    ion by nucleus or ion name (H, D, He+, ...)."""
    from driven_atom.atom import Atom
    from driven_atom.atom.model_atoms import species_names

    return Atom.from_species(name) if name in species_names() else Atom.from_name(name)


def _atom_mass_kg(atom) -> float:
    """Mass of the atom (nucleus and electron) in kg; a clamped nucleus counts as heavy (no Doppler)."""
    from driven_atom.units import ELECTRON_MASS_KG

    return (atom.nuclear_mass + 1.0) * ELECTRON_MASS_KG if math.isfinite(atom.nuclear_mass) else math.inf


def _static_case(atom, species, state, component, lab, given, notes) -> LabCase:
    """A run configuration's static field: no photon, no focus (ADK over ramp and plateau)."""
    from driven_atom.atom import State

    if state.m is None:
        state = State(state.n, state.l, 0)
    case = LabCase(atom=atom, species=species, state=state, photon_energy=0.0, envelope=None,
                   peak_intensity=0.0, polarization="linear", static=component, notes=notes)
    if any(given.get(k) is not None for k in ("waist", "focus_fwhm", "beam_diameter", "density", "pressure",
                                              "length", "volume")):
        notes.append("a static field has no focus: the focus, gas and length are not used")
    case.inputs = {"species": species, "state": state.label, "given": {k: v for k, v in given.items()
                                                                         if isinstance(v, str)}}
    return case


def _echo(case: LabCase, lab: LabInput, given: dict, durations: list) -> dict:
    """Every input, converted: the lab's units in the key names, the user's spelling in ``given``."""
    from driven_atom.units import HARTREE_EV, photon_energy_to_wavelength_nm

    out = {"species": case.species, "state": case.state.label,
           "wavelength_nm": photon_energy_to_wavelength_nm(case.photon_energy),
           "photon_energy_eV": case.photon_energy * HARTREE_EV,
           "pulse_energy_J": case.pulse_energy, "power_W": lab.power, "rep_rate_Hz": lab.rep_rate,
           "intensity_Wcm2": lab.intensity * 1e-4 if lab.intensity is not None else None,
           "shape": case.envelope.shape if case.envelope.shape != "run" else "run configuration",
           "fwhm_s": case.envelope.fwhm, "duration_given_as": durations[0] if durations else None,
           "focus": case.focus.profile if case.focus else None,
           "waist_m": case.focus.waist if case.focus else None, "m2": lab.m2,
           "sheet_height_m": lab.sheet_height, "polarization": case.polarization,
           "density_cm3": case.density * 1e-6 if case.density is not None else None,
           "pressure_Pa": lab.pressure, "temperature_K": case.temperature,
           "beam_flux_cm2s": lab.beam_flux * 1e-4 if lab.beam_flux is not None else None,
           "beam_velocity_ms": lab.beam_velocity, "beam_divergence_rad": lab.beam_divergence,
           "length_m": case.length, "volume_m3": case.volume, "linewidth_Hz": lab.linewidth}
    out = {k: v for k, v in out.items() if v is not None}
    out["given"] = {k: (v if isinstance(v, str) else v) for k, v in given.items()}
    return out


__all__ = ["LabInput", "EstimateConfig", "LabCase", "lab_case", "read_source", "GROUPS"]
