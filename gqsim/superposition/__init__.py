"""Two (or more) masses each split into a spatial superposition of branches, picking up
conditional phases from their pair potentials.

Stages, one module each (data flows down the list):

``setup``                frozen parameter objects read from a validated protocol
``model``                joint-branch energies and phases (closed form while holding, quadrature
                         along split/recombine paths), entangling phase and its analytic rate
``channels``             branch-decoherence channels of each body and their decay exponents
``solvers``              ``branch_phases`` (exact element-wise solution) and ``density_matrix``
                         (Lindblad master equation through QuTiP)
``closed_form_measures`` closed forms for the equal-weight dephased qubit pair
``batched``              the array form of the hold-only qubit pair, for surveys
``environment``          the ``[environment]`` channels of each body and the decoherence tally
``run``                  protocol -> setup -> model -> channels -> solver -> run record
"""

from gqsim.superposition.batched import batched_support, evaluate_batch, gather_batch, needs_single_route
from gqsim.superposition.environment import decoherence_tally
from gqsim.superposition.estimates import rule_of_thumb_limit
from gqsim.superposition.forces import superposition_budget as force_tally
from gqsim.superposition.run import build, simulate

#: The family's public API: studies, reports and the command line use these names only.
__all__ = ["build", "simulate", "decoherence_tally", "force_tally", "rule_of_thumb_limit", "batched_support",
           "gather_batch", "evaluate_batch", "needs_single_route"]
