"""Setup stage of the environment: frozen descriptions of the apparatus around the masses.

A protocol's ``[environment]`` table (schema fragment
``gqsim/protocol/schemas/environment-v1.fragment.json``) becomes an :class:`Environment`
via :func:`environment_from_table`. Everything is SI; temperatures are in kelvin,
molecular masses are given in unified atomic mass units (``_u``) in files and kept
in kilograms here.

The rate formulas live in :mod:`gqsim.physics.environment.rates`; the objects the engines
consume are built in :mod:`gqsim.physics.environment.sources`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np
from scipy.constants import atomic_mass

from gqsim.errors import PhysicsError, ProtocolError
from gqsim.physics.materials import MATERIALS, material

__all__ = [
    "GAS_SPECIES",
    "SATURATED_RATE_CONVENTIONS",
    "Gas",
    "ThermalRadiation",
    "Laser",
    "ExtraRate",
    "Environment",
    "Sphere",
    "environment_from_table",
    "sphere_from_body_table",
    "schema_fragment",
    "with_environment_key",
]

#: Molecular masses [u] of the residual-gas species a protocol may name. Standard atomic
#: weights summed over the molecule; from memory (common practice, IUPAC tables), four digits.
GAS_SPECIES: dict[str, float] = {
    "H2": 2.016,
    "He": 4.0026,
    "Ne": 20.180,
    "N2": 28.014,
    "air": 28.965,  # mean molar mass of dry air, from memory
    "O2": 31.999,
    "Ar": 39.948,
    "H2O": 18.015,
}

#: Which saturated (large-separation) gas-collision rate to use; see ``rates.gas_saturated_rate``.
SATURATED_RATE_CONVENTIONS = ("thermal_wavelength", "geometric_collisions")


def _positive(key: str, value: float, *, allow_zero: bool = False) -> float:
    ok = value is not None and not isinstance(value, bool) and isinstance(value, (int, float))
    ok = ok and math.isfinite(value) and (value >= 0 if allow_zero else value > 0)
    if not ok:
        raise ProtocolError(key, value, f"must be a finite number {'>= 0' if allow_zero else '> 0'}")
    return float(value)


def _permittivity(key: str, value: Any) -> complex:
    """Accept a complex number or a [real, imaginary] pair; Im >= 0 (passive medium)."""
    if isinstance(value, (list, tuple)):
        if len(value) != 2:
            raise ProtocolError(key, value, "must be [real, imaginary]")
        value = complex(float(value[0]), float(value[1]))
    eps = complex(value)
    if not (math.isfinite(eps.real) and math.isfinite(eps.imag)):
        raise ProtocolError(key, value, "must be finite")
    if eps.imag < 0:
        raise ProtocolError(key, [eps.real, eps.imag],
                            "imaginary part must be >= 0 (a passive, absorbing medium; gqsim uses the "
                            "exp(-i omega t) convention, eps = eps' + i eps'')")
    if eps.real <= 0 and eps.imag == 0:
        raise ProtocolError(key, [eps.real, eps.imag], "a lossless dielectric needs a real part > 0")
    return eps


def _unit_vector(key: str, value: Any) -> np.ndarray:
    vec = np.asarray(value, dtype=float)
    if vec.shape != (3,) or not np.all(np.isfinite(vec)) or np.linalg.norm(vec) == 0:
        raise ProtocolError(key, value, "must be a non-zero 3-vector [x, y, z]")
    vec = vec / np.linalg.norm(vec)
    vec.setflags(write=False)
    return vec


@dataclass(frozen=True, kw_only=True)
class Gas:
    """Residual gas around the masses.

    Parameters
    ----------
    species : a key of :data:`GAS_SPECIES`, or ``"custom"`` with ``molecular_mass_kg``
    pressure_pa : pressure [Pa], >= 0
    temperature_k : gas temperature [K]; None means "the environment temperature"
    molecular_mass_kg : molecular mass [kg]; derived from ``species`` unless custom
    saturated_rate : one of :data:`SATURATED_RATE_CONVENTIONS`
    """

    species: str = "N2"
    pressure_pa: float
    temperature_k: float | None = None
    molecular_mass_kg: float | None = None
    saturated_rate: str = "thermal_wavelength"
    key: str = "environment.gas"

    def __post_init__(self):
        _positive(f"{self.key}.pressure_pa", self.pressure_pa, allow_zero=True)
        if self.temperature_k is not None:
            _positive(f"{self.key}.temperature_k", self.temperature_k)
        if self.saturated_rate not in SATURATED_RATE_CONVENTIONS:
            raise ProtocolError(f"{self.key}.saturated_rate", self.saturated_rate,
                                f"must be one of {list(SATURATED_RATE_CONVENTIONS)}")
        if self.species == "custom":
            if self.molecular_mass_kg is None:
                raise ProtocolError(f"{self.key}.molecular_mass_u", None, "is required with species = 'custom'")
            _positive(f"{self.key}.molecular_mass_u", self.molecular_mass_kg)
        elif self.species in GAS_SPECIES:
            table_mass = GAS_SPECIES[self.species] * atomic_mass
            # dataclasses.replace passes the derived mass back in: accept it when it is the table's
            if self.molecular_mass_kg is not None and not math.isclose(self.molecular_mass_kg, table_mass,
                                                                        rel_tol=1e-12):
                raise ProtocolError(f"{self.key}.molecular_mass_u", self.molecular_mass_kg / atomic_mass,
                                    "only allowed with species = 'custom'")
            object.__setattr__(self, "molecular_mass_kg", GAS_SPECIES[self.species] * atomic_mass)
        else:
            raise ProtocolError(f"{self.key}.species", self.species,
                                f"must be one of {sorted(GAS_SPECIES) + ['custom']}")


@dataclass(frozen=True, kw_only=True)
class ThermalRadiation:
    """Blackbody radiation of the surroundings (absorption, scattering) and of the body (emission).

    Parameters
    ----------
    include : whether to model it at all
    permittivity : relative permittivity of the body material at thermal-photon wavelengths
        (eps' + i eps'', eps'' >= 0); None takes the material table's value
    """

    include: bool = True
    permittivity: complex | None = None
    key: str = "environment.thermal_radiation"

    def __post_init__(self):
        if self.permittivity is not None:
            object.__setattr__(self, "permittivity", _permittivity(f"{self.key}.permittivity", self.permittivity))


@dataclass(frozen=True, kw_only=True)
class Laser:
    """A trapping or probe laser focused on the body (photon recoil).

    Parameters
    ----------
    power_w : beam power [W], >= 0
    wavelength_m : vacuum wavelength [m]
    waist_m : 1/e^2 intensity radius at the focus [m]
    polarisation_axis : (3,) direction of the linear polarisation
    propagation_axis : (3,) direction of propagation, perpendicular to the polarisation
    permittivity : relative permittivity of the body at the laser wavelength (eps'' >= 0)
    """

    power_w: float
    wavelength_m: float
    waist_m: float
    polarisation_axis: np.ndarray = field(default_factory=lambda: np.array([1.0, 0.0, 0.0]))
    propagation_axis: np.ndarray = field(default_factory=lambda: np.array([0.0, 0.0, 1.0]))
    permittivity: complex
    key: str = "environment.laser"

    def __post_init__(self):
        _positive(f"{self.key}.power_w", self.power_w, allow_zero=True)
        _positive(f"{self.key}.wavelength_m", self.wavelength_m)
        _positive(f"{self.key}.waist_m", self.waist_m)
        pol = _unit_vector(f"{self.key}.polarisation_axis", self.polarisation_axis)
        prop = _unit_vector(f"{self.key}.propagation_axis", self.propagation_axis)
        if abs(float(pol @ prop)) > 1e-9:
            raise PhysicsError(f"{self.key}.polarisation_axis", pol.tolist(),
                               "must be perpendicular to propagation_axis (a transverse wave)")
        object.__setattr__(self, "polarisation_axis", pol)
        object.__setattr__(self, "propagation_axis", prop)
        object.__setattr__(self, "permittivity", _permittivity(f"{self.key}.permittivity", self.permittivity))


@dataclass(frozen=True, kw_only=True)
class ExtraRate:
    """A user-supplied decoherence source: constant ``rate_per_s``, or a localisation rate
    ``localisation_per_m2_s`` saturating at ``saturation_per_s`` (None = never saturates)."""

    label: str
    rate_per_s: float | None = None
    localisation_per_m2_s: float | None = None
    saturation_per_s: float | None = None
    key: str = "environment.extra[0]"

    def __post_init__(self):
        if not self.label:
            raise ProtocolError(f"{self.key}.label", self.label, "must be a non-empty name")
        if (self.rate_per_s is None) == (self.localisation_per_m2_s is None):
            raise ProtocolError(f"{self.key}", self.label,
                                "give exactly one of rate_per_s or localisation_per_m2_s")
        if self.rate_per_s is not None:
            _positive(f"{self.key}.rate_per_s", self.rate_per_s, allow_zero=True)
            if self.saturation_per_s is not None:
                raise ProtocolError(f"{self.key}.saturation_per_s", self.saturation_per_s,
                                    "only allowed with localisation_per_m2_s")
        else:
            _positive(f"{self.key}.localisation_per_m2_s", self.localisation_per_m2_s, allow_zero=True)
            if self.saturation_per_s is not None:
                _positive(f"{self.key}.saturation_per_s", self.saturation_per_s)


@dataclass(frozen=True, kw_only=True)
class Environment:
    """Everything around the masses that decoheres or heats them.

    Parameters
    ----------
    temperature_k : temperature of the surroundings [K] (thermal radiation; the gas too
        unless it has its own)
    internal_temperature_k : temperature of the bodies' interior [K] (thermal emission);
        None means equal to ``temperature_k``
    gas : :class:`Gas` or None (perfect vacuum)
    thermal_radiation : :class:`ThermalRadiation`
    laser : :class:`Laser` or None
    extras : user-supplied sources
    """

    temperature_k: float
    internal_temperature_k: float | None = None
    gas: Gas | None = None
    thermal_radiation: ThermalRadiation = field(default_factory=ThermalRadiation)
    laser: Laser | None = None
    extras: tuple[ExtraRate, ...] = ()

    def __post_init__(self):
        _positive("environment.temperature_k", self.temperature_k)
        if self.internal_temperature_k is not None:
            _positive("environment.internal_temperature_k", self.internal_temperature_k)
        labels = [e.label for e in self.extras]
        if len(set(labels)) != len(labels):
            raise ProtocolError("environment.extra", labels, "labels must be unique")
        object.__setattr__(self, "extras", tuple(self.extras))

    @property
    def internal_k(self) -> float:
        """Internal temperature of the bodies [K]."""
        return self.temperature_k if self.internal_temperature_k is None else self.internal_temperature_k

    @property
    def gas_temperature_k(self) -> float | None:
        """Gas temperature [K] (None without gas)."""
        if self.gas is None:
            return None
        return self.temperature_k if self.gas.temperature_k is None else self.gas.temperature_k


@dataclass(frozen=True, kw_only=True)
class Sphere:
    """What the environment models need to know about one body: a homogeneous sphere.

    Parameters
    ----------
    label : name in reports
    radius_m : radius [m]
    mass_kg : mass [kg]
    thermal_permittivity : relative permittivity at thermal-photon wavelengths, or None if unknown
    material : material name, for messages
    """

    label: str = "body"
    radius_m: float
    mass_kg: float
    thermal_permittivity: complex | None = None
    material: str | None = None

    def __post_init__(self):
        _positive(f"{self.label}.radius_m", self.radius_m)
        _positive(f"{self.label}.mass_kg", self.mass_kg)
        if self.thermal_permittivity is not None:
            object.__setattr__(self, "thermal_permittivity",
                               _permittivity(f"{self.label}.thermal_permittivity", self.thermal_permittivity))


# ----------------------------------------------------------------------------- protocol -> setup

def environment_from_table(table: Mapping[str, Any], key: str = "environment") -> Environment:
    """Turn a validated ``[environment]`` table (see the schema fragment) into an :class:`Environment`."""
    gas = None
    if "gas" in table:
        g = table["gas"]
        mass_u = g.get("molecular_mass_u")
        gas = Gas(species=g.get("species", "N2"), pressure_pa=g["pressure_pa"],
                  temperature_k=g.get("temperature_k"),
                  molecular_mass_kg=None if mass_u is None else mass_u * atomic_mass,
                  saturated_rate=g.get("saturated_rate", "thermal_wavelength"), key=f"{key}.gas")
    rad_tab = table.get("thermal_radiation", {})
    radiation = ThermalRadiation(include=rad_tab.get("include", True), permittivity=rad_tab.get("permittivity"),
                                 key=f"{key}.thermal_radiation")
    laser = None
    if "laser" in table:
        las = table["laser"]
        extra = {name: las[name] for name in ("polarisation_axis", "propagation_axis") if name in las}
        laser = Laser(power_w=las["power_w"], wavelength_m=las["wavelength_m"], waist_m=las["waist_m"],
                      permittivity=las["permittivity"], key=f"{key}.laser", **extra)
    extras = tuple(
        ExtraRate(label=e["label"], rate_per_s=e.get("rate_per_s"),
                  localisation_per_m2_s=e.get("localisation_per_m2_s"),
                  saturation_per_s=e.get("saturation_per_s"), key=f"{key}.extra[{i}]")
        for i, e in enumerate(table.get("extra", ()))
    )
    return Environment(temperature_k=table["temperature_k"],
                       internal_temperature_k=table.get("internal_temperature_k"),
                       gas=gas, thermal_radiation=radiation, laser=laser, extras=extras)


def sphere_from_body_table(entry: Mapping[str, Any], *, mass_kg: float | None = None,
                           radius_m: float | None = None, key: str = "bodies[0]",
                           permittivity: complex | None = None) -> Sphere:
    """Build a :class:`Sphere` from a protocol's body table.

    ``mass_kg`` / ``radius_m`` may come from the setup stage (which already resolved
    mass from radius and density); otherwise they are read from the table, with the
    radius derived from mass and the material's density when only those are given.
    ``permittivity`` overrides the material's thermal permittivity.
    """
    name = entry.get("material")
    mat = material(name, f"{key}.material") if name is not None else None
    mass = mass_kg if mass_kg is not None else entry.get("mass_kg")
    radius = radius_m if radius_m is not None else entry.get("radius_m")
    density = entry.get("density_kg_m3") or (mat.density_kg_m3 if mat is not None else None)
    if radius is None:
        if mass is None or density is None:
            raise ProtocolError(f"{key}.radius_m", None,
                                "environment models need the body's size: give radius_m, or mass_kg with a material")
        radius = (3.0 * mass / (4.0 * math.pi * density)) ** (1.0 / 3.0)
    if mass is None:
        if density is None:
            raise ProtocolError(f"{key}.mass_kg", None, "is required (or radius_m with density_kg_m3 or material)")
        mass = 4.0 / 3.0 * math.pi * radius**3 * density
    eps = permittivity
    if eps is None and mat is not None:
        eps = getattr(mat, "thermal_permittivity", None)
    return Sphere(label=str(entry.get("label", key)), radius_m=float(radius), mass_kg=float(mass),
                  thermal_permittivity=eps, material=name)


def known_materials() -> list[str]:
    """Names of the material table (for messages)."""
    return sorted(MATERIALS)


def schema_fragment() -> dict:
    """The JSON schema of the ``[environment]`` table (``environment-v1.fragment.json``)."""
    from gqsim.protocol.reader import read_schema_file

    return read_schema_file("environment-v1.fragment.json")


def with_environment_key(schema: Mapping[str, Any]) -> dict:
    """A copy of a family schema with the optional ``environment`` table added (idempotent).

    The fragment's own ``$schema``/``$id``/``title`` are dropped; everything else becomes
    ``properties.environment``.
    """
    import json

    out = json.loads(json.dumps(schema))
    frag = {k: v for k, v in schema_fragment().items() if k not in ("$schema", "$id", "title")}
    frag["description"] = "the apparatus around the bodies (gas, thermal radiation, laser, extra rates)"
    out["properties"]["environment"] = frag
    return out
