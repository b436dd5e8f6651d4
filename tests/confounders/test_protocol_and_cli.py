"""Protocol fragment, table -> potentials, the bundled Hollowmere protocols and `gqsim forces`."""

import json
import math
import tomllib
from pathlib import Path

import jsonschema
import pytest
from click.testing import CliRunner
from scipy.constants import e

from gqsim.cli import cli
from gqsim.physics.electromagnetic import (
    ChargeInducedDipole,
    Coulomb,
    DipoleDipole,
    DipoleInducedDipole,
    RetardedCasimirPolder,
    potentials_from_tables,
    with_interaction_keys,
)
from gqsim.errors import PhysicsError, ProtocolError
from gqsim.studies.forces import force_budget, superposition_budget
from gqsim.physics.potentials import NewtonianGravity
from gqsim.protocol.reader import schema_for

PROTOCOLS = Path(__file__).resolve().parents[2] / "protocols"
QUOTED_6SF = 5e-6


def load(name):
    return tomllib.loads((PROTOCOLS / name).read_text(encoding="utf-8"))


def test_fragment_merges_into_the_superposition_schema_and_validates_bundled_protocols():
    schema = with_interaction_keys(schema_for("superposition"))
    assert with_interaction_keys(schema) == schema  # idempotent
    validator = jsonschema.Draft202012Validator(schema)
    for name in ("casimir-budget-diamonds.toml", "casimir-screened-diamonds.toml",
                 "charged-rehearsal-nanospheres.toml"):
        assert not list(validator.iter_errors(load(name))), name
    bad = load("charged-rehearsal-nanospheres.toml")
    bad["bodies"][0]["relative_permittivity"] = -2.0
    assert list(validator.iter_errors(bad))


def test_tables_become_potentials_in_order_with_gravity_first():
    bodies = [{"material": "diamond", "charge_c": e, "dipole_c_m": [1e-23, 0, 0]},
              {"relative_permittivity": 3.8, "charge_c": -e, "dipole_c_m": [0, 1e-23, 0]}]
    pots = potentials_from_tables(
        {"include": ["coulomb", "casimir_polder", "gravity", "charge_induced_dipole", "dipole_dipole",
                     "dipole_induced_dipole"]}, bodies,
        masses_kg=[1e-14, 2e-14], radii_m=[1e-6, 1e-6])
    assert [type(p) for p in pots] == [NewtonianGravity, Coulomb, RetardedCasimirPolder, ChargeInducedDipole,
                                       DipoleDipole, DipoleInducedDipole]
    assert pots[1].charge_b_c == -e and pots[2].permittivity_a == 5.7 and pots[2].permittivity_b == 3.8
    screened = potentials_from_tables({"include": ["gravity", "coulomb"], "conducting_screen": True}, bodies,
                                      masses_kg=[1e-14, 2e-14], radii_m=[1e-6, 1e-6])
    assert [p.label for p in screened] == ["gravity"]
    assert [p.label for p in potentials_from_tables(None, bodies, masses_kg=[1.0, 1.0], radii_m=[None, None])] == [
        "gravity"]


@pytest.mark.parametrize("include, bodies, radii, error, words", [
    (["dipole_dipole"], [{"dipole_c_m": [1e-23, 0, 0]}, {}], [1e-6, 1e-6], ProtocolError, "orientation"),
    (["casimir_polder"], [{"material": "gold"}, {"material": "diamond"}], [1e-6, 1e-6], PhysicsError, "dielectric"),
    (["casimir_polder"], [{}, {"material": "diamond"}], [1e-6, 1e-6], ProtocolError, "relative_permittivity"),
    (["casimir_polder"], [{"material": "diamond"}, {"material": "diamond"}], [None, 1e-6], ProtocolError,
     "radius_m"),
    (["coulomb"], [{}, {}], [1e-6, 1e-6], ProtocolError, "charge_c"),
    (["dipole_induced_dipole"], [{"material": "diamond"}, {"material": "diamond"}], [1e-6, 1e-6], ProtocolError,
     "orientation"),
    (["london_van_der_waals"], [{"material": "diamond"}, {"material": "diamond"}], [1e-6, 1e-6], ProtocolError,
     "dispersion_resonance_rad_s"),
])
def test_missing_or_unsuitable_body_data_names_the_key(include, bodies, radii, error, words):
    with pytest.raises(error) as info:
        potentials_from_tables({"include": include}, bodies, masses_kg=[1e-14, 1e-14], radii_m=radii)
    assert words in str(info.value) and "\n" not in str(info.value)


def test_bundled_budget_reproduces_the_diamond_check_values():
    # casimir-budget-diamonds: R = 1 um diamonds (m = 1.4703e-14 kg), in line, 450/250 um, 2.5 s:
    # gravity theta = 0.678626 rad and E_N = 0.414503 ebit (shared references §1.3 [DERIVED]).
    table = superposition_budget(load("casimir-budget-diamonds.toml"))
    assert table.row("gravity").value == pytest.approx(0.678626, rel=QUOTED_6SF)
    assert table.row("gravity").log_negativity == pytest.approx(0.414503, rel=QUOTED_6SF)
    assert 0 < table.row("casimir_polder").share < 0.1 and not table.flagged


def test_charged_rehearsal_is_coulomb_dominated_and_near_a_quarter_turn():
    # Coulomb in line, span << d: theta ~ -(e^2/(4 pi eps0)) 2 dx^2 t/(hbar d^3) (Taylor expansion
    # of 1/r; shared references §4.2 for the Coulomb energy) = -1.53 rad for 7 ms.
    table = superposition_budget(load("charged-rehearsal-nanospheres.toml"))
    from scipy.constants import epsilon_0, hbar
    leading = -(e**2 / (4 * math.pi * epsilon_0)) * 2 * (20e-9) ** 2 * 7e-3 / (hbar * (200e-6) ** 3)
    assert table.row("coulomb").value == pytest.approx(leading, rel=1e-6)  # next term O((dx/d)^2) = 1e-8
    assert table.flagged and table.row("coulomb").exceeds_limit


def test_screened_protocol_drops_casimir_polder_with_a_note():
    table = superposition_budget(load("casimir-screened-diamonds.toml"))
    assert [r.label for r in table.rows] == ["gravity", "all"]
    assert any("screen" in n for n in table.notes)


def test_budget_rejects_bad_fragment_values_in_one_line():
    data = load("casimir-budget-diamonds.toml")
    data["interactions"]["include"] = ["gravity", "magnetism"]
    with pytest.raises(ProtocolError) as info:
        superposition_budget(data)
    assert "interactions.include" in str(info.value) and "\n" not in str(info.value)


def test_cli_budget_table_json_flag_exit_and_errors(tmp_path):
    runner = CliRunner()
    ok = runner.invoke(cli, ["forces", "budget", str(PROTOCOLS / "casimir-budget-diamonds.toml")])
    assert ok.exit_code == 0 and "casimir_polder" in ok.output and "within the limit" in ok.output
    as_json = runner.invoke(cli, ["forces", "budget", "--json", str(PROTOCOLS / "casimir-budget-diamonds.toml")])
    rows = {r["label"]: r for r in json.loads(as_json.output)["rows"]}
    assert rows["gravity"]["value"] == pytest.approx(0.678626, rel=QUOTED_6SF)
    tight = runner.invoke(cli, ["forces", "budget", "--share-limit", "0.01",
                                str(PROTOCOLS / "casimir-budget-diamonds.toml")])
    assert tight.exit_code == 3 and "OVER LIMIT" in tight.output
    bad = tmp_path / "bad.toml"
    data = (PROTOCOLS / "casimir-budget-diamonds.toml").read_text().replace('radius_m = 1e-6', 'radius_m = -1e-6', 1)
    bad.write_text(data)
    err = runner.invoke(cli, ["forces", "budget", str(bad)])
    assert err.exit_code == 2 and err.output.count("\n") == 1 and "radius_m" in err.output


def test_cli_safe_gap():
    runner = CliRunner()
    out = runner.invoke(cli, ["forces", "safe-gap", "--material", "diamond"])
    # Shared references §4.1: 156.9 um for diamond at f = 0.1 (3510 kg/m^3 from gqsim's table).
    assert out.exit_code == 0
    assert float(out.output.strip().split()[-1]) == pytest.approx(156.9e-6, rel=5e-4)
    gold = runner.invoke(cli, ["forces", "safe-gap", "--material", "gold"])
    assert gold.exit_code == 2 and "conductor" in gold.output


def test_factory_for_pairwise_model_builders_reads_body_objects():
    from types import SimpleNamespace

    from gqsim.physics.electromagnetic import potential_factory

    a = SimpleNamespace(mass_kg=1e-14, radius_m=1e-6, material="diamond", charge_c=e)
    b = SimpleNamespace(mass_kg=2e-14, radius_m=2e-6, material="silica", charge_c=-e)
    coulomb = potential_factory("coulomb")(a, b)
    assert isinstance(coulomb, Coulomb) and coulomb.charge_b_c == -e
    cp = potential_factory("casimir_polder")(a, b)
    assert (cp.permittivity_a, cp.permittivity_b, cp.radius_b_m) == (5.7, 3.8, 2e-6)
    assert potential_factory("gravity")({"mass_kg": 1.0}, {"mass_kg": 2.0}).mass_b_kg == 2.0
    with pytest.raises(ProtocolError, match="orientation"):
        potential_factory("dipole_dipole")(a, b)
    with pytest.raises(ProtocolError, match="interactions.include"):
        potential_factory("magnetism")


def test_field_temperature_selects_the_thermal_casimir_polder():
    from gqsim.physics.electromagnetic import ThermalCasimirPolder

    bodies = [{"material": "diamond"}, {"material": "diamond"}]
    warm = potentials_from_tables({"include": ["casimir_polder"], "field_temperature_k": 4.0}, bodies,
                                  masses_kg=[1e-14, 1e-14], radii_m=[1e-6, 1e-6])
    cold = potentials_from_tables({"include": ["casimir_polder"], "field_temperature_k": 0.0}, bodies,
                                  masses_kg=[1e-14, 1e-14], radii_m=[1e-6, 1e-6])
    assert isinstance(warm[0], ThermalCasimirPolder) and warm[0].temperature_k == 4.0
    assert isinstance(cold[0], RetardedCasimirPolder)


def test_cli_safe_gap_with_a_warm_field_matches_the_classical_closed_form():
    # 300 K: the crossover lies deep in the classical regime, 3 k_B T a^2/d^5 = f G m^2 with
    # a = R^3 beta, m = 4/3 pi R^3 rho (radius cancels); Lifshitz zero-frequency term, from memory.
    from scipy.constants import G
    from scipy.constants import k as k_B

    out = CliRunner().invoke(cli, ["forces", "safe-gap", "--material", "diamond", "--field-temperature-k", "300"])
    assert out.exit_code == 0, out.output
    beta = 4.7 / 7.7
    expected = (3 * k_B * 300 * beta**2 / (0.1 * G * (4 / 3 * math.pi * 3510) ** 2)) ** 0.2
    assert float(out.output.split()[-1]) == pytest.approx(expected, rel=1e-5)  # printed to 6 figures
    bad = CliRunner().invoke(cli, ["forces", "safe-gap", "--material", "diamond", "--field-temperature-k", "-1"])
    assert bad.exit_code == 2 and "temperature_k" in bad.output


def test_oscillator_ion_rehearsal_budget_against_the_coupling_formulas():
    # Two singly charged ions 50 um apart, 1 MHz: kappa = -U''(d) = -2 e^2/(4 pi eps0 d^3) (Coulomb's
    # law), g = kappa/(2 m omega) (shared references §2.1 ladder form), and from the engine
    # E_N,max ~ 2 lambda, lambda = |g|/omega (§2.2 quench from the ground state: 0.0020040 for
    # lambda = 1e-3, i.e. the estimate holds to 0.2 %; 0.5 % allows for that and the time grid).
    from scipy.constants import epsilon_0

    data = load("charged-rehearsal-ions.toml")
    schema = with_interaction_keys(schema_for("oscillators"))
    assert not list(jsonschema.Draft202012Validator(schema).iter_errors(data))
    table = force_budget(data)
    m, d, w = 6.6359e-26, 50e-6, 2 * math.pi * 1e6
    kappa = -2 * e**2 / (4 * math.pi * epsilon_0 * d**3)
    row = table.row("coulomb")
    assert row.value == pytest.approx(kappa, rel=1e-9)
    assert row.extra["coupling_rate_rad_s"] == pytest.approx(kappa / (2 * m * w), rel=1e-9)
    assert row.log_negativity == pytest.approx(2 * abs(kappa) / (2 * m * w) / w, rel=5e-3)
    assert table.flagged and table.row("gravity").log_negativity < 1e-11
    assert table.row("all").log_negativity == pytest.approx(row.log_negativity, rel=1e-6)


def test_cli_budget_reads_oscillator_protocols():
    out = CliRunner().invoke(cli, ["forces", "budget", "--json", str(PROTOCOLS / "charged-rehearsal-ions.toml")])
    assert out.exit_code == 3  # Coulomb dominates: flagged
    doc = json.loads(out.output)
    assert doc["family"] == "oscillators" and doc["value_unit"] == "N/m"


def test_oscillator_budget_screen_and_dipoles():
    from scipy.constants import epsilon_0

    data = load("charged-rehearsal-ions.toml")
    data["interactions"]["conducting_screen"] = True
    screened = force_budget(data)
    assert [r.label for r in screened.rows] == ["gravity", "all"] and not screened.flagged
    # Head-to-tail dipoles along the chain: kappa = -U''(d) = -12 C/d^5 with U = C/d^3,
    # C = -2 p^2/(4 pi eps0) (Jackson Eq. (4.26), from memory).
    p = 1e-29
    data = load("charged-rehearsal-ions.toml")
    data["time_grid"]["points"] = 11  # only the stiffness is checked here
    data["interactions"] = {"include": ["gravity", "dipole_dipole"]}
    for body in data["bodies"]:
        body["dipole_c_m"] = [p, 0.0, 0.0]
    table = force_budget(data)
    coeff = -2 * p * p / (4 * math.pi * epsilon_0)
    assert table.row("dipole_dipole").value == pytest.approx(-12 * coeff / 50e-6**5, rel=1e-9)
    # Transverse modes would need the orientation-aware Hessian: refused, one line.
    for body in data["bodies"]:
        body["modes"] = ["y"]
    with pytest.raises(PhysicsError, match="line of centres"):
        force_budget(data)


def test_cli_safe_gap_for_entangling_phases_is_radius_independent():
    # The CLI computes at R = 1 um; both entangling phases scale as R^6, so R = 3 um diamonds
    # (built here directly) must give the same centre distance (root finding rtol 1e-12).
    from gqsim.physics.electromagnetic import smallest_centre_distance_for_phase_m

    out = CliRunner().invoke(cli, ["forces", "safe-gap", "--material", "diamond", "--style", "in_line",
                                   "--branch-span-m", "250e-6"])
    assert out.exit_code == 0, out.output
    values = dict(line.split(": ") for line in out.output.strip().splitlines())
    radius = 3e-6
    mass = 4 / 3 * math.pi * radius**3 * 3510.0
    cp = RetardedCasimirPolder(radius_a_m=radius, radius_b_m=radius, permittivity_a=5.7, permittivity_b=5.7)
    direct = smallest_centre_distance_for_phase_m(cp, NewtonianGravity(mass_a_kg=mass, mass_b_kg=mass),
                                                  style="in_line", branch_span_m=250e-6, contact_m=2 * radius)
    assert float(values["casimir_polder_safe_centre_distance_m"]) == pytest.approx(direct, rel=1e-5)  # 6 figures
    assert float(values["closest_branch_approach_m"]) == pytest.approx(direct - 250e-6, rel=1e-5)
    half = CliRunner().invoke(cli, ["forces", "safe-gap", "--material", "diamond", "--style", "in_line"])
    assert half.exit_code == 2 and "give both" in half.output


def test_budget_says_when_casimir_polder_is_taken_at_zero_temperature():
    table = superposition_budget(load("casimir-budget-diamonds.toml"))
    assert any("zero field temperature" in n and "300 K" in n for n in table.notes)
    data = load("casimir-budget-diamonds.toml")
    data["interactions"]["field_temperature_k"] = 4.0
    warm = superposition_budget(data)
    assert not any("zero field temperature" in n for n in warm.notes)
    # 4 K adds ~1.4 % at 200 um (thermal length 573 um): the share grows a little.
    assert warm.row("casimir_polder").share > table.row("casimir_polder").share


def test_screen_that_leaves_no_force_is_a_one_line_error():
    for name in ("casimir-budget-diamonds.toml", "charged-rehearsal-ions.toml"):
        data = load(name)
        data["interactions"] = {"include": ["coulomb"], "conducting_screen": True}
        with pytest.raises(ProtocolError, match="include gravity"):
            force_budget(data)


@pytest.mark.parametrize("body, key, value, words", [
    (0, "relative_permittivity", -2.0, "must be >= 1"),
    (1, "dipole_c_m", 1e-23, "[px, py, pz]"),
    (0, "charge_c", "one electron", "number"),
])
def test_budget_rejects_bad_body_keys_in_one_line(body, key, value, words):
    # The bad-input checks, through the protocol route.
    data = load("casimir-budget-diamonds.toml")
    data["bodies"][body][key] = value
    with pytest.raises(ProtocolError) as info:
        superposition_budget(data)
    text = str(info.value)
    assert f"bodies[{body}].{key}" in text and words in text and "\n" not in text
