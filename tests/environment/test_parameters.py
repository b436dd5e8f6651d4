"""Setup objects and the [environment] schema fragment: valid tables and one-line errors for bad input."""

import jsonschema
import pytest
from scipy.constants import atomic_mass

from gqsim.physics.environment import Environment, Gas, Laser, Sphere, ThermalRadiation, environment_from_table
from gqsim.protocol.reader import split_environment
from gqsim.physics.environment.parameters import GAS_SPECIES, ExtraRate, schema_fragment, sphere_from_body_table
from gqsim.physics.environment.sources import thermal_permittivity
from gqsim.errors import PhysicsError, ProtocolError

FULL_TABLE = {
    "temperature_k": 4.0,
    "internal_temperature_k": 10.0,
    "gas": {"species": "He", "pressure_pa": 1e-14, "saturated_rate": "geometric_collisions"},
    "thermal_radiation": {"include": True, "permittivity": [5.7, 1e-4]},
    "laser": {"power_w": 0.01, "wavelength_m": 1.55e-6, "waist_m": 2e-6, "permittivity": [2.1, 0.0],
              "polarisation_axis": [0, 1, 0], "propagation_axis": [1, 0, 0]},
    "extra": [{"label": "magnet noise", "rate_per_s": 0.01},
              {"label": "patch fields", "localisation_per_m2_s": 1e5, "saturation_per_s": 0.1}],
}

MINIMAL_PROTOCOL = {
    "schema_version": 1, "family": "superposition",
    "arrangement": {"style": "in_line", "centre_distance_m": 450e-6, "branch_span_m": 250e-6},
    "bodies": [{"radius_m": 1e-6, "material": "diamond"}, {"radius_m": 1e-6, "material": "diamond"}],
    "timing": {"hold_s": 1.0},
}


def test_fragment_is_a_valid_schema_and_accepts_the_full_table():
    schema = schema_fragment()
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.validate(FULL_TABLE, schema, cls=jsonschema.Draft202012Validator)
    env = environment_from_table(FULL_TABLE)
    assert env.internal_k == 10.0 and env.gas_temperature_k == 4.0
    assert env.gas.molecular_mass_kg == pytest.approx(GAS_SPECIES["He"] * atomic_mass)
    assert env.thermal_radiation.permittivity == complex(5.7, 1e-4)
    assert env.laser.polarisation_axis.tolist() == [0.0, 1.0, 0.0]
    assert [e.label for e in env.extras] == ["magnet noise", "patch fields"]


def test_species_in_schema_match_the_table():
    enum = schema_fragment()["properties"]["gas"]["properties"]["species"]["enum"]
    assert sorted(enum) == sorted(list(GAS_SPECIES) + ["custom"])


@pytest.mark.parametrize("patch, key, words", [
    ({"gas": {"pressure_pa": -1e-12}}, "environment.gas.pressure_pa", ">= 0"),
    ({"temperature_k": -4.0}, "environment.temperature_k", "> 0"),
    ({"internal_temperature_k": 0}, "environment.internal_temperature_k", "> 0"),
    ({"gas": {"species": "Xe2", "pressure_pa": 1e-12}}, "environment.gas.species", "one of"),
    ({"thermal_radiation": {"permittivity": [5.7, -0.1]}}, "environment.thermal_radiation.permittivity[1]", ">= 0"),
    ({"gas": {"pressure_pa": 1e-12, "flow": 3}}, "environment.gas.flow", "unknown key"),
])
def test_bad_tables_give_one_line_errors_naming_the_key(patch, key, words):
    data = dict(MINIMAL_PROTOCOL, environment={"temperature_k": 4.0, **patch})
    with pytest.raises(ProtocolError) as info:
        split_environment(data)
    message = str(info.value)
    assert "\n" not in message
    assert message.startswith(key), message
    assert words in message


def test_dataclasses_validate_programmatic_input():
    with pytest.raises(ProtocolError, match=r"environment.gas.pressure_pa = -1.0: must be a finite number >= 0"):
        Gas(pressure_pa=-1.0)
    with pytest.raises(ProtocolError, match="environment.gas.species = 'Kr9'"):
        Gas(species="Kr9", pressure_pa=1.0)
    with pytest.raises(ProtocolError, match="molecular_mass_u"):
        Gas(species="custom", pressure_pa=1.0)
    with pytest.raises(ProtocolError, match="imaginary part must be >= 0"):
        ThermalRadiation(permittivity=3.8 - 0.1j)
    with pytest.raises(ProtocolError, match="environment.temperature_k"):
        Environment(temperature_k=-1.0)
    with pytest.raises(PhysicsError, match="perpendicular"):
        Laser(power_w=1.0, wavelength_m=1e-6, waist_m=1e-6, permittivity=2.0,
              polarisation_axis=[0, 0, 1], propagation_axis=[0, 0, 1])
    with pytest.raises(ProtocolError, match="exactly one"):
        ExtraRate(label="x", rate_per_s=1.0, localisation_per_m2_s=1.0)
    with pytest.raises(ProtocolError, match="labels must be unique"):
        Environment(temperature_k=1.0, extras=(ExtraRate(label="a", rate_per_s=1.0),
                                               ExtraRate(label="a", rate_per_s=2.0)))


def test_unknown_material_and_metal_without_thermal_permittivity():
    with pytest.raises(ProtocolError, match=r"bodies\[1\].material = 'unobtainium'"):
        sphere_from_body_table({"radius_m": 1e-6, "material": "unobtainium"}, key="bodies[1]")
    gold = sphere_from_body_table({"radius_m": 1e-6, "material": "gold", "label": "G"})
    assert gold.mass_kg == pytest.approx(19300 * 4 / 3 * 3.141592653589793e-18)
    with pytest.raises(PhysicsError, match="environment.thermal_radiation.permittivity"):
        thermal_permittivity(Environment(temperature_k=4.0), gold)
    # an explicit permittivity in the environment overrides the (missing) table value
    env = Environment(temperature_k=4.0, thermal_radiation=ThermalRadiation(permittivity=[1e3, 1e3]))
    assert thermal_permittivity(env, gold) == complex(1e3, 1e3)


def test_sphere_radius_from_mass_and_material_density():
    sphere = sphere_from_body_table({"mass_kg": 1.4703e-14, "material": "diamond"})
    # shared §1.3 [DERIVED]: diamond R = 1 um with rho = 3510 has m = 1.4703e-14 kg
    assert sphere.radius_m == pytest.approx(1e-6, rel=1e-4)
    assert sphere.thermal_permittivity is not None and sphere.thermal_permittivity.imag >= 0
    with pytest.raises(ProtocolError, match="radius"):
        sphere_from_body_table({"mass_kg": 1e-14})
    with pytest.raises(ProtocolError, match="Tern.radius_m"):
        Sphere(label="Tern", radius_m=-1.0, mass_kg=1.0)


@pytest.mark.parametrize("family", ["superposition", "oscillators"])
def test_fragment_wires_into_both_family_schemas(family, monkeypatch):
    # How the lead wires the fragment: properties.environment = fragment. After wiring, parse_protocol accepts
    # the table itself and reports bad values with the same one-line wording.
    import gqsim.protocol.reader as protocol_module
    from gqsim.physics.environment.parameters import with_environment_key

    original = protocol_module.schema_for
    monkeypatch.setattr(protocol_module, "schema_for", lambda fam, version=1: with_environment_key(original(fam, version)))
    base = dict(MINIMAL_PROTOCOL) if family == "superposition" else {
        "schema_version": 1, "family": "oscillators",
        "bodies": [{"label": "W", "radius_m": 1e-4, "material": "silica", "position_m": [0, 0, 0], "trap_hz": 1.0},
                   {"label": "F", "radius_m": 1e-4, "material": "silica", "position_m": [1e-3, 0, 0], "trap_hz": 1.0}],
        "stages": [{"label": "hold", "duration_s": 1.0}],
    }
    proto = protocol_module.parse_protocol({**base, "environment": FULL_TABLE})
    assert proto.data["environment"]["gas"]["species"] == "He"
    with pytest.raises(ProtocolError, match=r"^environment.gas.pressure_pa = -1"):
        protocol_module.parse_protocol({**base, "environment": {"temperature_k": 4.0, "gas": {"pressure_pa": -1}}})
    # split_environment keeps working once the family schema knows the key
    _, table = split_environment({**base, "environment": FULL_TABLE})
    assert table["temperature_k"] == 4.0
