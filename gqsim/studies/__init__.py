"""Studies that sit on top of a simulation: decoherence tallies and tolerable settings, spurious
forces, certification plans, route comparison and surveys. A study calls a family's public
``simulate`` (through :mod:`gqsim.families`) and reads the run record; it never reaches inside a
family."""
