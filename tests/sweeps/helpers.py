"""Small sweep definitions shared by the sweep tests (base protocols are the bundled ones)."""

from pathlib import Path

from gqsim.protocol.reader import load_protocol, parse_protocol
from gqsim.studies.surveys import parse_sweep

PROTOCOLS = Path(__file__).resolve().parents[2] / "protocols"


def small_sweep(axes, base=None, **extra):
    """A sweep over ``axes`` of the bundled side-by-side protocol (or ``base_protocol=``, or a
    Protocol ``base``)."""
    data = {"sweep_version": 1, "base_protocol": extra.pop("base_protocol", "side-by-side-qubits.toml"),
            "axes": axes, **extra}
    return parse_sweep(data, base_dir=PROTOCOLS, base=base)


def inline_with_localisation():
    """The in-line bench-2 protocol with separation-squared dephasing (saturating on body 0)."""
    data = load_protocol(PROTOCOLS / "inline-qubits.toml").to_dict()
    data["bodies"][0]["dephasing"] = {"model": "separation_squared", "localisation_per_m2_s": 1e6,
                                      "saturation_per_s": 0.03}
    data["bodies"][1]["dephasing"] = {"model": "separation_squared", "localisation_per_m2_s": 1e6}
    data["time_grid"] = {"points": 201}
    return parse_protocol(data, source="inline-qubits.toml with localisation")
