"""Every bad oscillator protocol kept as a fixture fails with one line naming the key, exit status 2."""

from pathlib import Path

import pytest
from click.testing import CliRunner

from gqsim.cli import cli

BAD = Path(__file__).parent / "fixtures" / "bad"

# fixture -> text the one-line error must contain (the key and what is wrong)
EXPECTED = {
    "zero_trap.toml": "trap_hz",
    "unstable_mode.toml": "mode A.x",
    "negative_occupation.toml": "bodies[0].initial.occupation",
    "squeeze_without_angle.toml": "bodies[0].initial.squeeze_angle_rad",
    "more_bodies_than_positions.toml": "arrangement.positions_m",
    "unknown_key.toml": "bodies[0].trap_frequency",
    "inverted_free_mode.toml": "inverted_modes",
}


def test_every_fixture_is_listed():
    assert {p.name for p in BAD.glob("*.toml")} == set(EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_bad_file_gives_one_line_error(name):
    for command in ("check", "run"):
        out = CliRunner().invoke(cli, [command, str(BAD / name)])
        assert out.exit_code == 2
        lines = [line for line in out.output.splitlines() if line.strip()]
        assert len(lines) == 1 and lines[0].startswith("gqsim: error:")
        assert EXPECTED[name] in lines[0]
        assert "Traceback" not in out.output
