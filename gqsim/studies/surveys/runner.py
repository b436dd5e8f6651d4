"""Run a sweep into its store: pick the route, hand out blocks to an executor, write results
as they come back, resume what is missing.

Executors (one code path; only how blocks are handed out differs):

``serial``
    in this process.
``processes``
    a pool of local worker processes (spawned, one BLAS/OpenMP thread each).
``dask``
    a running Dask distributed scheduler given by address (optional extra ``parallel``).

Workers only compute; this process is the single writer of the store. Work travels to the
workers as JSON text (the sweep definition) and comes back as plain arrays.
"""

from __future__ import annotations

import concurrent.futures as cf
import contextlib
import json
import multiprocessing
import os
from pathlib import Path
from typing import Callable, Iterator

import numpy as np

from gqsim.errors import GqsimError, ProtocolError
from gqsim import superposition as batched
from gqsim.studies.surveys.one_by_one import safe_evaluate
from gqsim.studies.surveys.spec import NOISE_LABEL_WIDTH, Axis, Execution, SweepSpec, point_protocol
from gqsim.studies.surveys.storage import DONE, FAILED, MESSAGE_WIDTH, SweepStore, open_sweep

__all__ = ["run_sweep", "resolve_route", "compute_block", "compute_points", "spec_from_definition", "SCHEDULER_TIMEOUT_S"]

#: seconds to wait for a Dask scheduler before reporting it unreachable
SCHEDULER_TIMEOUT_S = 5
_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")


def batched_support(spec: SweepSpec) -> tuple[bool, str]:
    """Whether the family's array route can run ``spec`` exactly; returns (ok, reason if not)."""
    if spec.base.family == "oscillators":
        from gqsim.oscillators import gaussian_support

        return gaussian_support(spec)
    return batched.batched_support(spec)


def resolve_route(spec: SweepSpec, requested: str | None = None) -> str:
    """``batched`` or ``one_by_one`` for ``spec`` (``auto`` picks batched when it applies)."""
    requested = requested or spec.execution.route
    ok, reason = batched_support(spec)
    if requested == "auto":
        return "batched" if ok else "one_by_one"
    if requested == "batched" and not ok:
        raise ProtocolError("execution.route", "batched", f"not available for this sweep ({reason}); use 'auto'")
    if requested not in ("batched", "one_by_one"):
        raise ProtocolError("execution.route", requested, "must be 'auto', 'batched' or 'one_by_one'")
    return requested


# ----------------------------------------------------------------------------- work unit

_SPEC_CACHE: dict[str, SweepSpec] = {}


def spec_from_definition(text: str) -> SweepSpec:
    """Rebuild a SweepSpec from :meth:`SweepSpec.definition` JSON (values were checked already)."""
    if text not in _SPEC_CACHE:
        from gqsim.protocol.reader import parse_protocol

        d = json.loads(text)
        base = parse_protocol(d["base_protocol"], source=d.get("source", "<sweep>"))
        axes = tuple(Axis(path=a["path"], label=a["label"], values=tuple(a["values"]), spacing=a["spacing"])
                     for a in d["axes"])
        if len(_SPEC_CACHE) >= 4:
            _SPEC_CACHE.pop(next(iter(_SPEC_CACHE)))
        _SPEC_CACHE[text] = SweepSpec(base=base, axes=axes, figures=tuple(d["figures"]), source=d.get("source", ""),
                                      certification=d.get("certification", {}))
    return _SPEC_CACHE[text]


def _block_points(shape, block) -> np.ndarray:
    grids = np.meshgrid(*[np.arange(s.start, s.stop) for s in block], indexing="ij")
    return np.ravel_multi_index([g.ravel() for g in grids], shape)


def compute_block(definition: str, route: str, block: tuple) -> tuple[dict, np.ndarray, np.ndarray]:
    """Figures, status and messages of one block (flat arrays in C order of the block)."""
    spec = spec_from_definition(definition)
    block = tuple(slice(*s) if isinstance(s, tuple) else s for s in block)
    return compute_points(spec, route, _block_points(spec.shape, block))


def _empty_figure(name: str, n: int) -> np.ndarray:
    """(n,) placeholders of a figure before (or instead of) evaluation: -1, "" or NaN."""
    if name == "entangled":
        return np.full(n, -1, dtype=np.int8)
    if name == "dominant_noise":
        return np.full(n, "", dtype=f"<U{NOISE_LABEL_WIDTH}")
    return np.full(n, np.nan)


def compute_points(spec: SweepSpec, route: str, points: np.ndarray) -> tuple[dict, np.ndarray, np.ndarray]:
    """Figures, status and messages of the flat grid indices ``points`` (n,)."""
    n = points.size
    figures = {name: _empty_figure(name, n) for name in spec.figures}
    status = np.full(n, DONE, dtype=np.int8)
    messages = np.full(n, "", dtype=f"<U{MESSAGE_WIDTH}")
    if route == "batched" and spec.base.family == "oscillators":
        from gqsim.oscillators import evaluate_gaussian_points

        values, mask = evaluate_gaussian_points(spec, points)
        for name in spec.figures:
            figures[name][:] = values[name]
        single = np.flatnonzero(mask)
    elif route == "batched":
        data = batched.gather_batch(spec, points)
        values = batched.evaluate_batch(data)
        for name in spec.figures:
            figures[name][:] = values[name]
        single = np.flatnonzero(batched.needs_single_route(data))
    else:
        single = np.arange(n)
    for j in single:
        try:
            protocol = point_protocol(spec.base, spec.point_values(points[j]))
        except GqsimError as exc:
            protocol = exc
        result, message = safe_evaluate(protocol, spec.figures, spec.certification)
        if result is None:
            status[j] = FAILED
            messages[j] = message[:MESSAGE_WIDTH]
            for name in spec.figures:
                figures[name][j] = _empty_figure(name, 1)[0]
        else:
            for name in spec.figures:
                figures[name][j] = result[name]
    return figures, status, messages


# ----------------------------------------------------------------------------- executors

@contextlib.contextmanager
def _single_threaded_children():
    """Spawned workers inherit the environment: one BLAS/OpenMP thread each (2 cores are shared)."""
    saved = {k: os.environ.get(k) for k in _THREAD_VARIABLES}
    os.environ.update({k: "1" for k in _THREAD_VARIABLES})
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def _serial(definition, route, blocks) -> Iterator:
    for block in blocks:
        yield block, compute_block(definition, route, _wire(block))


def _processes(definition, route, blocks, workers) -> Iterator:
    with _single_threaded_children():
        pool = cf.ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"))
    try:
        futures = {pool.submit(compute_block, definition, route, _wire(b)): b for b in blocks}
        for future in cf.as_completed(futures):
            yield futures[future], future.result()
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _dask(definition, route, blocks, address) -> Iterator:
    try:
        from distributed import Client, as_completed
    except ImportError:
        raise ProtocolError("execution.executor", "dask",
                            "needs the optional extra 'parallel' (pip install 'gqsim[parallel]')") from None
    try:
        client = Client(address, timeout=f"{SCHEDULER_TIMEOUT_S}s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ProtocolError("execution.scheduler_address", address,
                            f"no Dask scheduler answered within {SCHEDULER_TIMEOUT_S} s ({type(exc).__name__}); "
                            "check the address or use executor = 'processes'") from None
    try:
        futures = {client.submit(compute_block, definition, route, _wire(b), pure=False, retries=2): b
                   for b in blocks}
        for future in as_completed(list(futures), loop=client.loop):
            yield futures[future], future.result()
    finally:
        client.close()


def _wire(block):
    return tuple((s.start, s.stop) for s in block)


# ----------------------------------------------------------------------------- entry point

def run_sweep(spec: SweepSpec, store: str | Path, *, route: str | None = None, executor: str | None = None,
              workers: int | None = None, scheduler_address: str | None = None, progress: bool = False,
              fresh: bool = False, retry_failed: bool = False,
              after_block: Callable[[int], None] | None = None):
    """Evaluate every unfinished grid point of ``spec`` into the zarr store at ``store``.

    Finished points already in the store are kept and not recomputed, so calling this again
    after an interruption (Ctrl-C, SIGKILL, a lost worker) completes the sweep; the result is
    the same dataset as an uninterrupted run. ``after_block(k)`` is called after the k-th
    block of this call has been written (progress hooks, tests).

    Returns
    -------
    xarray.Dataset
        the whole stored sweep, loaded into memory.
    """
    ex: Execution = spec.execution
    chosen = resolve_route(spec, route)
    executor = executor or ex.executor
    if executor not in ("serial", "processes", "dask"):
        raise ProtocolError("execution.executor", executor, "must be 'serial', 'processes' or 'dask'")
    address = scheduler_address or ex.scheduler_address
    if executor == "dask" and not address:
        raise ProtocolError("execution.scheduler_address", None, "is required with executor = 'dask'")
    workers = int(workers or ex.workers)
    handle = SweepStore.create_or_resume(store, spec, chosen, overwrite=fresh)
    blocks = handle.pending_blocks(retry_failed=retry_failed)
    definition = json.dumps({**spec.definition(), "source": spec.base.source}, sort_keys=True)
    if not blocks:
        return open_sweep(store)
    if executor == "serial" or (executor == "processes" and (workers == 1 or len(blocks) == 1)):
        stream = _serial(definition, chosen, blocks)
    elif executor == "processes":
        stream = _processes(definition, chosen, blocks, workers)
    else:
        stream = _dask(definition, chosen, blocks, address)
    total = sum(int(np.prod([s.stop - s.start for s in b])) for b in blocks)
    bar = _progress_bar(total, progress)
    try:
        for k, (block, (figures, status, messages)) in enumerate(stream, start=1):
            shape = tuple(s.stop - s.start for s in block)
            handle.write_block(block, {n: v.reshape(shape) for n, v in figures.items()},
                               status.reshape(shape), messages.reshape(shape))
            bar.update(status.size)
            if after_block is not None:
                after_block(k)
    finally:
        bar.close()
        stream.close()
    return open_sweep(store)


def _progress_bar(total: int, enabled: bool):
    from tqdm import tqdm

    return tqdm(total=total, unit="pt", disable=not enabled, desc="sweep", dynamic_ncols=True, smoothing=0.1)
