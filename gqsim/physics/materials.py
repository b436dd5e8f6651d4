"""Setup-stage data: named materials a protocol may refer to.

Densities and static relative permittivities are handbook values quoted from memory
(common practice in the field; check a materials handbook before relying on the
third digit). Metals have no finite static permittivity and carry ``None``.
"""

from __future__ import annotations

from dataclasses import dataclass

from gqsim.errors import ProtocolError

__all__ = ["Material", "MATERIALS", "material"]


@dataclass(frozen=True, kw_only=True)
class Material:
    """A homogeneous material.

    Parameters
    ----------
    name : key used in protocol files
    density_kg_m3 : mass density [kg/m^3]
    relative_permittivity : static (low-frequency) relative permittivity, or None for metals
    note : where the numbers come from
    thermal_permittivity : complex relative permittivity eps' + i eps'' (eps'' >= 0) at the
        wavelengths of cryogenic thermal photons (~0.1-1 THz), used by the blackbody models
        of :mod:`gqsim.physics.environment`; None when no value is tabulated (metals)
    thermal_permittivity_note : where that value comes from
    """

    name: str
    density_kg_m3: float
    relative_permittivity: float | None
    note: str = "handbook value, from memory (common practice)"
    thermal_permittivity: complex | None = None
    thermal_permittivity_note: str = ""

    def __post_init__(self):
        if not self.density_kg_m3 > 0:
            raise ProtocolError(f"material {self.name}.density_kg_m3", self.density_kg_m3, "must be > 0")


# Thermal (sub-mm) permittivities: real part = the static value above; imaginary part =
# real part x a dielectric loss tangent of the order quoted for the 0.1-1 THz band
# (from memory, order of magnitude only: fused silica ~1e-3, sapphire and high-resistivity
# silicon ~1e-4, CVD diamond ~1e-5). Blackbody absorption/emission scale linearly with
# eps'': override it in [environment.thermal_radiation] when a measured value is known.
_LOSS_NOTE = "eps' static value; eps'' = eps' x loss tangent {} (from memory, order of magnitude)"

_TABLE = [
    Material(name="diamond", density_kg_m3=3510.0, relative_permittivity=5.7,
             thermal_permittivity=complex(5.7, 5.7e-5), thermal_permittivity_note=_LOSS_NOTE.format("1e-5")),
    Material(name="silica", density_kg_m3=2200.0, relative_permittivity=3.8,
             thermal_permittivity=complex(3.8, 3.8e-3), thermal_permittivity_note=_LOSS_NOTE.format("1e-3")),
    Material(name="silicon", density_kg_m3=2329.0, relative_permittivity=11.7,
             thermal_permittivity=complex(11.7, 1.17e-3), thermal_permittivity_note=_LOSS_NOTE.format("1e-4")),
    Material(name="sapphire", density_kg_m3=3980.0, relative_permittivity=9.4,
             thermal_permittivity=complex(9.4, 9.4e-4), thermal_permittivity_note=_LOSS_NOTE.format("1e-4")),
    Material(name="gold", density_kg_m3=19300.0, relative_permittivity=None),
    Material(name="tungsten", density_kg_m3=19250.0, relative_permittivity=None),
    Material(name="osmium", density_kg_m3=22590.0, relative_permittivity=None),
]

MATERIALS: dict[str, Material] = {m.name: m for m in _TABLE}


def material(name: str, key: str = "material") -> Material:
    """Look up a material by name; unknown names raise a ProtocolError naming ``key``."""
    try:
        return MATERIALS[name]
    except KeyError:
        raise ProtocolError(key, name, f"must be one of {sorted(MATERIALS)}") from None
