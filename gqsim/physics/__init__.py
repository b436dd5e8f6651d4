"""Physics shared by every model family: materials, pair potentials (gravity and the
electromagnetic confounders), environment decoherence rates, and entanglement measures that act
on any state. Imports only the protocol layer and the foundation modules."""
