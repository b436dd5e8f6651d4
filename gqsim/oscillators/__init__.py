"""Trapped oscillators coupled through the Hessian of their pair potentials.

Stages, one module each (data flows down the list):

``setup``            frozen parameter objects (bodies, modes, stages, initial states, channels)
                     read from a validated protocol
``model``            dimensionless scaling (the one place SI meets unit-free numbers), the
                     Hessian of the pair potentials, the quadratic Hamiltonian of every stage
``channels``         drift and diffusion of the open dynamics (damping, localisation, heating,
                     continuous position measurement) in the model's scaled units
``engines_gaussian`` exact mean/covariance propagation (Van Loan block exponentials)
``engines_fock``     truncated Fock-basis cross-check (QuTiP behind ``qutip_adapter``)
``measures``         logarithmic negativity, Simon, Duan, purity, mutual information
``analytic``         closed-form companions (coupling g, quench bound, thermal threshold, free fall)
``run``              protocol -> model -> engine -> :class:`gqsim.record.Result`
``compare``          the oscillator and superposition routes side by side
"""

from gqsim.oscillators.run import build, simulate, simulate_model

__all__ = ["build", "simulate", "simulate_model"]
