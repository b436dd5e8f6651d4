"""gqsim: simulate candidate experiments on gravity-mediated entanglement.

Notebook use in three lines::

    import gqsim
    protocol = gqsim.load_protocol("protocols/inline-qubits.toml")
    result = gqsim.simulate(protocol)

``result.series["log_negativity"]``, ``result.summary``, ``result.provenance``.
"""

from gqsim._version import __version__
from gqsim.errors import ConvergenceError, EngineError, GqsimError, PhysicsError, ProtocolError
from gqsim.physics.measures import concurrence, log_negativity, negativity, partial_transpose, purity
from gqsim.superposition.model import entangling_rate_estimate, mass_for_entangling_rate
from gqsim.families import build, simulate
from gqsim.protocol.reader import Protocol, load_protocol, parse_protocol
from gqsim.references import REFERENCES, cite
from gqsim.report.tables import plot_measures, summary_table, write_outputs
from gqsim.record import Result
from gqsim.physics.witnesses import optimal_witness_frame, spin_witness_lab, spin_witness_optimised

# Entry points of the later stages, imported on first use so that `import gqsim` (and every
# CLI command) does not pay for xarray, zarr or the oscillator engines it does not need.
_LAZY = {
    "CertifyOptions": "gqsim.studies.certification.plan",
    "certify_result": "gqsim.studies.certification.plan",
    "read_certify_file": "gqsim.studies.certification.plan",
    "force_budget": "gqsim.studies.forces",
    "noise_budget": "gqsim.studies.decoherence",
    "tolerable_limit": "gqsim.studies.decoherence",
    "load_sweep": "gqsim.studies.surveys",
    "run_sweep": "gqsim.studies.surveys",
    "compare_routes": "gqsim.studies.compare",
}


def __getattr__(name):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'gqsim' has no attribute {name!r}")


__all__ = [
    "__version__",
    "CertifyOptions",
    "certify_result",
    "read_certify_file",
    "force_budget",
    "noise_budget",
    "tolerable_limit",
    "load_sweep",
    "run_sweep",
    "compare_routes",
    "ConvergenceError",
    "EngineError",
    "GqsimError",
    "PhysicsError",
    "Protocol",
    "ProtocolError",
    "REFERENCES",
    "Result",
    "build",
    "cite",
    "concurrence",
    "entangling_rate_estimate",
    "load_protocol",
    "log_negativity",
    "mass_for_entangling_rate",
    "negativity",
    "optimal_witness_frame",
    "parse_protocol",
    "partial_transpose",
    "plot_measures",
    "purity",
    "simulate",
    "spin_witness_lab",
    "spin_witness_optimised",
    "summary_table",
    "write_outputs",
]
