"""Throughput of the batched two-qubit sweep route against gqsim.simulate called point by point.

Both run in this process on the same grid definition (side-by-side bench-3 protocol, 200 time
points per grid point; six two-oscillator maps likewise: trap x squeezing, mass x heating,
gas pressure x temperature, mass x heating with a Coulomb term and after a trap quench, whose
keys the batched route applies without building a model per point, and mass x heating in helium,
where the gas rates depend on the mass and every point builds its own model). Targets from issue 7: >= 1e5 points/s for
a two-qubit map, >= 1e4 for a two-oscillator map, and >= 50x the single-point API in a loop.
The machine is shared by several jobs: expect run-to-run spread. Reported: the compiled kernel alone, the whole serial sweep
into a zarr store (storage included), and the single-point loop. Last line: the headline ratio.

Run:  /work/venv/bin/python benchmarks/bench_sweep_fast_path.py
"""

from __future__ import annotations

import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from gqsim.protocol.reader import load_protocol, parse_protocol
from gqsim.families import simulate
from gqsim.studies.surveys import parse_sweep, point_protocol, run_sweep
from gqsim.superposition import batched

ROOT = Path(__file__).resolve().parents[1]
TIME_POINTS = 200
KERNEL_BLOCK = 4096


def _spec(n_mass: int, n_gamma: int):
    data = load_protocol(ROOT / "protocols" / "side-by-side-qubits.toml").to_dict()
    data["time_grid"] = {"points": TIME_POINTS}
    base = parse_protocol(data, source="side-by-side-qubits.toml (200 time points)")
    return parse_sweep({
        "sweep_version": 1, "base_protocol": "unused",
        "axes": [{"path": "bodies[*].mass_kg", "logarithmic": {"start": 2e-15, "stop": 5e-14, "count": n_mass}},
                 {"path": "bodies[*].dephasing.rate_per_s", "linear": {"start": 0.0, "stop": 0.5, "count": n_gamma}}],
        "execution": {"block_points": KERNEL_BLOCK},
    }, base=base)


def _best_of(repeats, fn):
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def _oscillator_base():
    """Two 1 mg oscillators 1 mm apart with a little heating (our own demo numbers), 200 time points."""
    body = {"mass_kg": 1e-6, "trap_hz": 1.0, "modes": ["x"], "channels": {"heating_phonons_per_s": 1e-3},
            "initial": {"kind": "gaussian", "squeeze_r": 0.5, "squeeze_angle_rad": 0.0}}
    return parse_protocol({
        "schema_version": 1, "family": "oscillators",
        "bodies": [{**body, "label": "Wren", "position_m": [0.0, 0.0, 0.0]},
                   {**body, "label": "Finch", "position_m": [1e-3, 0.0, 0.0]}],
        "stages": [{"label": "hold", "duration_s": 3.0}], "time_grid": {"points": TIME_POINTS}})


def _oscillator_map(axes, base=None) -> tuple[float, float]:
    """Points/s of the batched Gaussian route and of gqsim.simulate on a 20 x 20 map."""
    from gqsim.studies.surveys.runner import compute_points

    spec = parse_sweep({"sweep_version": 1, "base_protocol": "unused", "axes": axes}, base=base or _oscillator_base())
    points = np.arange(spec.n_points)
    compute_points(spec, "batched", points[:4])
    batched_s = _best_of(3, lambda: compute_points(spec, "batched", points))
    protocols = [point_protocol(spec.base, spec.point_values(i)) for i in points[::20]]
    simulate(protocols[0])
    loop_s = _best_of(1, lambda: [simulate(p) for p in protocols])
    return points.size / batched_s, len(protocols) / loop_s


def _interacting_base():
    """The demo pair with a Coulomb term next to gravity (1e-18 C each, our own numbers)."""
    data = _oscillator_base().to_dict()
    for body in data["bodies"]:
        body["charge_c"] = 1e-18
    data["interactions"] = {"include": ["gravity", "coulomb"]}
    return parse_protocol(data, source="demo pair with a Coulomb term")


def _quench_base():
    """The demo pair quenched into 0.8 Hz traps (stage trap differs from the preparation trap)."""
    data = _oscillator_base().to_dict()
    data["stages"][0]["trap_hz"] = 0.8
    return parse_protocol(data, source="demo pair quenched into a softer trap")


def _gas_base_with_masses():
    """The Brackenfold protocol with masses given directly (so that a mass axis exists)."""
    data = _gas_base().to_dict()
    for body in data["bodies"]:
        body["mass_kg"] = 8e-7
        body.pop("material")
    return parse_protocol(data, source="brackenfold-gas.toml with masses (200 time points)")


def _gas_base():
    data = load_protocol(ROOT / "protocols" / "brackenfold-gas.toml").to_dict()
    data["time_grid"] = {"points": TIME_POINTS}
    return parse_protocol(data, source="brackenfold-gas.toml (200 time points)")


#: trap frequency x squeezing: array key x initial-state key (one model build for the whole map)
SHARED_MODELS = [{"path": "bodies[*].trap_hz", "linear": {"start": 0.5, "stop": 2.0, "count": 20}},
                 {"path": "bodies[*].initial.squeeze_r", "linear": {"start": 0.1, "stop": 1.0, "count": 20}}]
#: mass x heating rate: both array keys (the model and channel stages in array form)
ARRAY_KEYS = [{"path": "bodies[*].mass_kg", "logarithmic": {"start": 1e-7, "stop": 1e-5, "count": 20}},
              {"path": "bodies[*].channels.heating_phonons_per_s", "logarithmic": {"start": 1e-5, "stop": 1e-1, "count": 20}}]
#: gas pressure x temperature of the bundled Brackenfold protocol: [environment] keys (channel
#: tables from the environment stage per point, model in array form)
ENVIRONMENT_KEYS = [{"path": "environment.gas.pressure_pa", "logarithmic": {"start": 1e-22, "stop": 1e-16, "count": 20}},
                    {"path": "environment.temperature_k", "linear": {"start": 1.0, "stop": 20.0, "count": 20}}]
#: mass x heating, used with a Coulomb term in [interactions] and after a quench into a softer
#: stage trap (both in array form), and with the Brackenfold helium (the gas rates depend on the
#: mass: outside the array forms, every point builds its own model)
MASS_HEATING = ARRAY_KEYS


def main() -> None:
    spec = _spec(400, 500)  # 200 000 points
    n = spec.n_points
    t0 = time.perf_counter()
    batched.evaluate_batch(batched.gather_batch(spec, np.arange(64)))  # compile / load the kernel cache
    print(f"kernel warm-up (compile or cache load): {time.perf_counter() - t0:.2f} s")

    def kernel_pass():
        for start in range(0, n, KERNEL_BLOCK):
            pts = np.arange(start, min(start + KERNEL_BLOCK, n))
            batched.evaluate_batch(batched.gather_batch(spec, pts))

    kernel_s = _best_of(3, kernel_pass)
    kernel_rate = n / kernel_s
    print(f"batched kernel: {n} points x {TIME_POINTS} times in {kernel_s:.3f} s = {kernel_rate:.3g} points/s")

    small = _spec(100, 100)  # 10 000 points through run_sweep, zarr writes included
    workdir = Path(tempfile.mkdtemp(prefix="gqsim-bench-"))
    try:
        run_sweep(_spec(3, 3), workdir / "warm.zarr", executor="serial")  # lazy imports of the storage stack
        t0 = time.perf_counter()
        run_sweep(small, workdir / "bench.zarr", executor="serial")
        sweep_s = time.perf_counter() - t0
    finally:
        shutil.rmtree(workdir, ignore_errors=True)
    sweep_rate = small.n_points / sweep_s
    print(f"whole serial sweep into zarr: {small.n_points} points in {sweep_s:.3f} s = {sweep_rate:.3g} points/s")

    picks = np.linspace(0, n - 1, 40).astype(int)
    protocols = [point_protocol(spec.base, spec.point_values(i)) for i in picks]
    simulate(protocols[0])  # warm caches

    def loop():
        for p in protocols:
            simulate(p)

    loop_s = _best_of(1, loop)
    loop_rate = picks.size / loop_s
    print(f"gqsim.simulate in a loop: {picks.size} points in {loop_s:.3f} s = {loop_rate:.3g} points/s")
    print(f"targets: >= 1e5 points/s -> {'met' if kernel_rate >= 1e5 else 'NOT met'} by the kernel "
          f"({kernel_rate:.3g}); >= 50x -> {'met' if kernel_rate / loop_rate >= 50 else 'NOT met'}")
    for name, axes, base in (("trap x squeezing (one model build)", SHARED_MODELS, None),
                             ("mass x heating (array keys)", ARRAY_KEYS, None),
                             ("gas pressure x temperature ([environment] keys)", ENVIRONMENT_KEYS, _gas_base()),
                             ("mass x heating with a Coulomb term ([interactions] keys)", MASS_HEATING,
                              _interacting_base()),
                             ("mass x heating after a trap quench (array keys)", MASS_HEATING, _quench_base()),
                             ("mass x heating in helium (a model build per point)",
                              [dict(MASS_HEATING[0], logarithmic={"start": 4e-7, "stop": 4e-6, "count": 20}),
                               MASS_HEATING[1]], _gas_base_with_masses())):
        osc_rate, osc_loop_rate = _oscillator_map(axes, base)
        print(f"two-oscillator map {name}, batched Gaussian route: {osc_rate:.3g} points/s; gqsim.simulate "
              f"in a loop: {osc_loop_rate:.3g} points/s; ratio {osc_rate / osc_loop_rate:.1f} "
              f"(targets: >= 1e4 points/s {'met' if osc_rate >= 1e4 else 'NOT met'}, "
              f">= 50x {'met' if osc_rate / osc_loop_rate >= 50 else 'NOT met'})")
    print(f"sweep_whole_run_speedup_vs_simulate: {sweep_rate / loop_rate:.1f}")
    print(f"sweep_batched_speedup_vs_simulate: {kernel_rate / loop_rate:.1f}")


if __name__ == "__main__":
    main()
