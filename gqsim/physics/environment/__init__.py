"""Environment decoherence: from the apparatus (gas, thermal radiation, lasers) to the channels.

Stages inside this subpackage follow gqsim's data flow:

``parameters``       frozen setup objects (:class:`Environment`, :class:`Gas`, :class:`Laser`,
                     :class:`Sphere` ...) and the protocol-table reader
``rates``            the published rate formulas (pure functions, SI)
``thermal_photons``  exact separation dependence F(Delta) of the blackbody channels
``sources``          channel objects for superposed masses and terms for trapped oscillators
``thresholds``       knob values at which the summed rate reaches a target (no simulation)
``budget``           the noise budget and root-found tolerable limits (full simulations)
"""

from gqsim.physics.environment.parameters import (
    GAS_SPECIES,
    Environment,
    ExtraRate,
    Gas,
    Laser,
    Sphere,
    ThermalRadiation,
    environment_from_table,
    sphere_from_body_table,
)
from gqsim.physics.environment.sources import (
    EnvironmentDephasing,
    OscillatorTerm,
    Source,
    branch_decoherence,
    environment_sources,
    oscillator_terms,
    validity_notes,
)
from gqsim.physics.environment.thresholds import rate_limit

__all__ = [
    "GAS_SPECIES",
    "Environment",
    "ExtraRate",
    "Gas",
    "Laser",
    "Sphere",
    "ThermalRadiation",
    "environment_from_table",
    "sphere_from_body_table",
    "EnvironmentDephasing",
    "OscillatorTerm",
    "Source",
    "branch_decoherence",
    "environment_sources",
    "oscillator_terms",
    "validity_notes",
    "rate_limit",
]
