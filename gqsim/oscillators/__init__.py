"""Trapped oscillators coupled through the Hessian of their pair potentials.

Stages, one module each (data flows down the list):

``setup``            frozen parameter objects (bodies, modes, stages, initial states, channels)
                     read from a validated protocol
``model``            dimensionless scaling (the one place SI meets unit-free numbers), the
                     Hessian of the pair potentials, the quadratic Hamiltonian of every stage
``channels``         drift and diffusion of the open dynamics (damping, localisation, heating,
                     continuous position measurement) in the model's scaled units
``solve_moments``    exact mean/covariance propagation (Van Loan block exponentials)
``solve_number_basis`` truncated Fock-basis cross-check (QuTiP behind ``qutip_adapter``)
``measures``         logarithmic negativity, Simon, Duan, purity, mutual information
``analytic``         closed-form companions (coupling g, quench bound, thermal threshold, free fall)
``run``              protocol -> model -> engine -> :class:`gqsim.record.Result`
``environment``      the ``[environment]`` folded into each body's channels; the heating tally
``batched``          array forms of the model and channel stages for surveys (``batched_kernel``: compiled)
"""

from gqsim.oscillators import analytic
from gqsim.oscillators.batched import evaluate_gaussian_points, gaussian_support
from gqsim.oscillators.environment import decoherence_tally
from gqsim.oscillators.forces import oscillator_budget as force_tally
from gqsim.oscillators.run import build, pair_covariances, simulate, simulate_model
from gqsim.oscillators.setup import AXES

#: The family's public API: studies, reports and the command line use these names only.
__all__ = ["build", "simulate", "simulate_model", "decoherence_tally", "force_tally", "pair_covariances", "analytic",
           "AXES", "gaussian_support", "evaluate_gaussian_points"]
