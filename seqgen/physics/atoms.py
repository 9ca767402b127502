"""Alkali atom data and ground-state magnetic moments.

Data live in ``data/atoms.yaml`` next to this module (units in the key names,
a source beside every value) and are checked against
``data/atoms.schema.json`` (JSON Schema draft 2020-12) when first loaded.
Everything returned here is SI: kg, Hz, m, W/m^2, J/T, C m, C m^2/V.

Sign convention for Zeeman energies (as in the alkali D-line data
compilations): E = (g_J m_J + g_I m_I) mu_B B, and to first order in B
E = g_F m_F mu_B B. A positive g_F m_F is therefore a low-field seeker.
Magnetic moments are -dE/dB (the package-wide convention, see
``seqgen.physics``): negative for a low-field seeker.
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path
from types import MappingProxyType
from typing import Mapping

import yaml
from scipy import constants as sc

_DATA_DIR = Path(__file__).resolve().parent / "data"
DATA_FILE = _DATA_DIR / "atoms.yaml"
SCHEMA_FILE = _DATA_DIR / "atoms.schema.json"

_U = sc.physical_constants["atomic mass constant"][0]
_A0 = sc.physical_constants["Bohr radius"][0]
_AU_POLARIZABILITY = 4 * sc.pi * sc.epsilon_0 * _A0**3  # C m^2 / V
_AU_DIPOLE = sc.e * _A0  # C m
MU_B = sc.physical_constants["Bohr magneton"][0]
_J = 0.5  # electronic angular momentum of the alkali 2S1/2 ground state


@dataclass(frozen=True)
class PLine:
    """A ground-state transition to a higher nP_J level (beyond D1 and D2).

    ``reduced_dipole_cm`` is |<nS1/2||d||n'P_J>| in C m; ``wavelength_m`` the vacuum wavelength.
    """

    state: str
    wavelength_m: float
    reduced_dipole_cm: float


@dataclass(frozen=True)
class Species:
    """One atomic species, all fields SI.

    ``hyperfine_a_hz`` is A/h; ``hyperfine_splitting_hz`` is
    [E(F=I+1/2) - E(F=I-1/2)]/h = A (I + 1/2), negative when inverted (K40).
    Linewidths are Gamma/2pi in Hz. ``saturation_intensity_w_m2`` is for the
    D2 cycling transition. ``scattering_lengths_m`` is keyed by state
    ("F=1,mF=-1", "singlet", "triplet"). ``sources`` maps each field name (and
    "scattering_length:<state>", "p_line:<state>:wavelength",
    "p_line:<state>:reduced_dipole") to the publication the value comes from.
    ``core_polarizability_cm2_v`` (C m^2/V) is the static polarisability of the
    closed-shell core and ``p_lines`` the transitions to higher P levels; with
    the D lines they give the ground-state polarisability
    (``seqgen.physics.optical``).
    """

    name: str
    mass_kg: float
    nuclear_spin: float
    hyperfine_a_hz: float
    hyperfine_splitting_hz: float
    g_j: float
    g_i: float
    d1_wavelength_m: float
    d2_wavelength_m: float
    d1_linewidth_hz: float
    d2_linewidth_hz: float
    saturation_intensity_w_m2: float
    core_polarizability_cm2_v: float
    p_lines: tuple[PLine, ...]
    # read-only mappings: left out of the hash so Species stays hashable (cache keys)
    scattering_lengths_m: Mapping[str, float] = field(hash=False)
    sources: Mapping[str, str] = field(hash=False, repr=False)


# YAML key -> (Species field, factor to SI)
_FIELDS = {
    "mass_u": ("mass_kg", _U),
    "nuclear_spin": ("nuclear_spin", 1.0),
    "hyperfine_a_hz": ("hyperfine_a_hz", 1.0),
    "hyperfine_splitting_hz": ("hyperfine_splitting_hz", 1.0),
    "g_j": ("g_j", 1.0),
    "g_i": ("g_i", 1.0),
    "d1_wavelength_nm": ("d1_wavelength_m", 1e-9),
    "d2_wavelength_nm": ("d2_wavelength_m", 1e-9),
    "d1_linewidth_mhz": ("d1_linewidth_hz", 1e6),
    "d2_linewidth_mhz": ("d2_linewidth_hz", 1e6),
    "saturation_intensity_mw_cm2": ("saturation_intensity_w_m2", 10.0),  # 1 mW/cm^2 = 10 W/m^2
    "core_polarizability_au": ("core_polarizability_cm2_v", _AU_POLARIZABILITY),
}


@lru_cache(maxsize=1)
def load_schema() -> dict:
    return json.loads(SCHEMA_FILE.read_text(encoding="utf-8"))


@lru_cache(maxsize=1)
def _raw_data() -> dict:
    from . import schemacheck, stored

    text = DATA_FILE.read_text(encoding="utf-8")
    # libyaml's parser when present (10x faster; the same safe constructor, so the same data)
    data = yaml.load(text, Loader=getattr(yaml, "CSafeLoader", yaml.SafeLoader))
    # these exact bytes of data and schema were found valid by an earlier run: no need to walk them again
    key = "atoms-valid|" + hashlib.sha256(text.encode() + b"\0" + SCHEMA_FILE.read_bytes()).hexdigest()
    if stored.read("checked-data", key) is True:
        return data
    fast = schemacheck.compile_schema(load_schema())
    if fast is None or not fast.accepts(data):
        import jsonschema  # here: only to word what is wrong (or to decide, for a schema not compiled)

        validator = jsonschema.Draft202012Validator(load_schema())
        errors = sorted(validator.iter_errors(data), key=lambda e: list(map(str, e.absolute_path)))
        if errors:
            where = "; ".join(f"{'/'.join(map(str, e.absolute_path)) or '<root>'}: {e.message}" for e in errors[:5])
            raise ValueError(f"{DATA_FILE.name} does not match {SCHEMA_FILE.name}: {where}")
    stored.write("checked-data", key, True)
    return data


@lru_cache(maxsize=None)
def _build(name: str) -> Species:
    entry = _raw_data()["species"][name]
    values: dict = {}
    sources: dict = {}
    for key, (attr, factor) in _FIELDS.items():
        values[attr] = float(entry[key]["value"]) * factor
        sources[attr] = entry[key]["source"]
    lines = []
    for line in entry["p_lines"]:
        state = line["state"]
        lines.append(PLine(state, float(line["wavelength_nm"]["value"]) * 1e-9,
                           float(line["reduced_dipole_au"]["value"]) * _AU_DIPOLE))
        sources[f"p_line:{state}:wavelength"] = line["wavelength_nm"]["source"]
        sources[f"p_line:{state}:reduced_dipole"] = line["reduced_dipole_au"]["source"]
    values["p_lines"] = tuple(lines)
    lengths = {}
    for state, q in entry["scattering_lengths_a0"].items():
        lengths[state] = float(q["value"]) * _A0
        sources[f"scattering_length:{state}"] = q["source"]
    return Species(name=name, scattering_lengths_m=MappingProxyType(lengths),
                   sources=MappingProxyType(sources), **values)


def known_species() -> tuple[str, ...]:
    """Canonical names in the data file, e.g. ("Li6", "Na23", ...)."""
    return tuple(_raw_data()["species"])


_NAME_RE = (re.compile(r"^([a-z]{1,2})(\d+)$"), re.compile(r"^(\d+)([a-z]{1,2})$"))


def _canonical(name: str) -> str | None:
    key = re.sub(r"[\s_\-]", "", name).lower()
    for i, pattern in enumerate(_NAME_RE):
        m = pattern.match(key)
        if m:
            symbol, number = (m.group(1), m.group(2)) if i == 0 else (m.group(2), m.group(1))
            return symbol.capitalize() + str(int(number))
    return None


def get_species(name: str) -> Species:
    """Look up a species: "Rb87", "Rb-87", "87Rb", "rb 87" all give Rb87.

    Raises KeyError naming the known species when there is no match.
    """
    canonical = _canonical(str(name))
    if canonical not in known_species():
        raise KeyError(f"unknown species {name!r}; known: {', '.join(known_species())}")
    return _build(canonical)


def g_f(species: Species, F: float) -> float:
    """Hyperfine Lande factor of a ground-state level F (J = 1/2).

    g_F = g_J [F(F+1) - I(I+1) + J(J+1)] / [2F(F+1)]
        + g_I [F(F+1) + I(I+1) - J(J+1)] / [2F(F+1)]
    (Rev. Mod. Phys. 49, 31 (1977); same form in the alkali D-line data
    compilations). Valid where the Zeeman shift is small against the hyperfine
    splitting.
    """
    i = species.nuclear_spin
    if abs(F - (i + _J)) > 1e-9 and abs(F - (i - _J)) > 1e-9:
        raise ValueError(f"{species.name}: ground state has F = {i - _J:g} or {i + _J:g}, not {F:g}")
    if F == 0:
        return 0.0  # F = 0 has no moment (cannot occur for the data here, kept for safety)
    ff, ii, jj = F * (F + 1), i * (i + 1), _J * (_J + 1)
    return species.g_j * (ff - ii + jj) / (2 * ff) + species.g_i * (ff + ii - jj) / (2 * ff)


def magnetic_moment_first_order(species: Species, F: float, mF: float) -> float:
    """First-order (low-field) magnetic moment in J/T: moment = -dE/dB = -g_F m_F mu_B.

    Sign convention of the whole physics package (``seqgen.physics``): the
    Zeeman energy is E = g_F m_F mu_B B to first order, the moment is -dE/dB,
    so a negative value is a low-field seeker (trappable in a magnetic
    minimum, pulled towards weaker field: force = moment grad|B|) and a
    positive value a high-field seeker. m_F = 0 gives zero (clock states).
    Equals ``seqgen.physics.zeeman.magnetic_moment`` at B = 0.
    """
    if abs(mF) > F + 1e-9 or abs((F - mF) - round(F - mF)) > 1e-9:
        raise ValueError(f"mF = {mF:g} is not a sublevel of F = {F:g}")
    return -g_f(species, F) * mF * MU_B
