"""Every rule for bad protocol input: one line naming the key, exit status 2, no traceback."""

from pathlib import Path

import pytest
from click.testing import CliRunner

import gqsim
from gqsim.cli import cli

BAD = Path(__file__).parent / "fixtures" / "bad"

CASES = {
    "zero-mass.toml": "bodies[0].mass_kg",
    "negative-mass.toml": "bodies[0].mass_kg",
    "nan-field.toml": "field.acceleration_m_s2[1]",
    "inf-stop.toml": "time_grid.stop_s",
    "unknown-key.toml": "timing.hold_seconds",
    "non-increasing-grid.toml": "time_grid.times_s[2]",
    "wrong-schema.toml": "schema_version",
    "overlapping-bodies.toml": "bodies",
    "coincident-branches.toml": "bodies[0].branch_offsets_m",
    "zero-norm-amplitudes.toml": "bodies[0].amplitudes",
    "t2-exceeds-2t1.toml": "bodies[0].spin.t2_s",
    "not-toml.toml": "protocol file",
}


def test_every_fixture_has_a_case():
    assert sorted(p.name for p in BAD.glob("*.toml")) == sorted(CASES)


@pytest.mark.parametrize("name, key", sorted(CASES.items()))
def test_api_raises_typed_error_naming_the_key(name, key):
    with pytest.raises(gqsim.GqsimError) as info:
        gqsim.simulate(BAD / name)
    assert str(info.value).startswith(key + " = ") or str(info.value).startswith(key + "=") or key in str(info.value)
    assert "\n" not in str(info.value)


@pytest.mark.parametrize("command", ["run", "check"])
@pytest.mark.parametrize("name, key", sorted(CASES.items()))
def test_cli_prints_one_line_and_exits_2(command, name, key):
    result = CliRunner().invoke(cli, [command, str(BAD / name)])
    assert result.exit_code == 2, result.output
    lines = [line for line in result.output.splitlines() if line.strip()]
    assert len(lines) == 1, result.output
    assert lines[0].startswith("gqsim: error: ")
    assert key in lines[0]
    assert "Traceback" not in result.output


def test_missing_file_is_a_one_line_error():
    result = CliRunner().invoke(cli, ["run", "does-not-exist.toml"])
    assert result.exit_code == 2
    assert "does-not-exist.toml" in result.output
    assert "Traceback" not in result.output


def test_messages_say_what_is_allowed():
    with pytest.raises(gqsim.ProtocolError) as info:
        gqsim.load_protocol(BAD / "unknown-key.toml")
    assert "allowed keys here" in str(info.value) and "hold_s" in str(info.value)
    with pytest.raises(gqsim.ProtocolError) as info:
        gqsim.load_protocol(BAD / "wrong-schema.toml")
    assert "schema_version = 1" in str(info.value)
