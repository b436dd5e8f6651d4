"""gqsim: simulate candidate experiments on gravity-mediated entanglement.

Notebook use in three lines::

    import gqsim
    protocol = gqsim.load_protocol("protocols/inline-qubits.toml")
    result = gqsim.simulate(protocol)

``result.series["log_negativity"]``, ``result.summary``, ``result.provenance``.
"""

from gqsim._version import __version__
from gqsim.errors import ConvergenceError, EngineError, GqsimError, PhysicsError, ProtocolError
from gqsim.measures import concurrence, log_negativity, negativity, partial_transpose, purity
from gqsim.model import entangling_rate_estimate, mass_for_entangling_rate
from gqsim.pipeline import build, simulate
from gqsim.protocol import Protocol, load_protocol, parse_protocol
from gqsim.references import REFERENCES, cite
from gqsim.report import plot_measures, summary_table, write_outputs
from gqsim.result import Result
from gqsim.witnesses import optimal_witness_frame, spin_witness_lab, spin_witness_optimised

__all__ = [
    "__version__",
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
