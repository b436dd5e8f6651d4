"""Sweep storage: a labelled N-d dataset (xarray) in a chunked zarr store, written block by block.

Layout
------
* one dimension per axis (its label), coordinates = the axis values;
* one variable per figure of merit, plus ``status`` (int8: 0 pending, 1 done, 2 failed) and
  ``message`` (the one-line error of a failed point, empty otherwise);
* ``dominant_noise`` is fixed-width text (the noise budget's source name, "" until evaluated);
* attributes: the sweep definition, its fingerprint, the evaluation route, the resolved base
  protocol and the package versions (JSON text).

Every work unit is one zarr chunk of the grid. A unit's figures are written first and its
status last, so a process killed between the two leaves the unit "pending" and a resume
recomputes it; a unit whose status says done is never recomputed. The store is zarr format 2
(fixed-width text has a stable specification there). No pickle anywhere.
"""

from __future__ import annotations

import itertools
import json
import shutil
from pathlib import Path

import numpy as np
import xarray as xr
import zarr

from gqsim.errors import ProtocolError
from gqsim.record import package_versions

__all__ = ["PENDING", "DONE", "FAILED", "MESSAGE_WIDTH", "SweepStore", "open_sweep", "export_netcdf"]

PENDING, DONE, FAILED = 0, 1, 2
#: characters kept of a failed point's message (fixed-width text in the store)
MESSAGE_WIDTH = 240
_INT_FIGURES = {"entangled": -1}


def chunk_shape(shape: tuple[int, ...], block_points: int) -> tuple[int, ...]:
    """Chunks of about ``block_points`` points: trailing axes whole while they fit, then a slab."""
    chunks = [1] * len(shape)
    room = max(1, int(block_points))
    for k in range(len(shape) - 1, -1, -1):
        take = min(shape[k], room)
        chunks[k] = take
        if take < shape[k]:
            break
        room //= shape[k]
        if room < 1:
            break
    return tuple(max(1, c) for c in chunks)


class SweepStore:
    """Handle on a sweep's zarr store; only the process that owns it writes."""

    def __init__(self, path: Path):
        self.path = Path(path)
        self.group = zarr.open_group(str(self.path), mode="r+", zarr_format=2)
        attrs = self.group.attrs
        self.fingerprint = attrs["fingerprint"]
        self.dims = tuple(json.loads(attrs["axis_labels"]))
        self.shape = tuple(self.group["status"].shape)
        self.chunks = tuple(self.group["status"].chunks)
        self.figures = tuple(json.loads(attrs["figure_names"]))

    # ------------------------------------------------------------------ creation / opening
    @classmethod
    def create_or_resume(cls, path: str | Path, spec, route: str, *, overwrite: bool = False) -> "SweepStore":
        """Open ``path`` if it holds this very sweep (resume), else create it.

        Raises
        ------
        ProtocolError
            if ``path`` holds a store written by another sweep definition or route.
        """
        path = Path(path)
        fingerprint = spec.fingerprint(route)
        if path.exists() and overwrite:
            shutil.rmtree(path)
        if path.exists():
            try:
                found = zarr.open_group(str(path), mode="r", zarr_format=2).attrs.get("fingerprint")
            except Exception:  # not a zarr group at all
                found = None
            if found is None:
                raise ProtocolError("store", str(path), "exists and is not a gqsim sweep store; choose a new path")
            if found != fingerprint:
                raise ProtocolError("store", str(path), "was written by another sweep definition (or route); "
                                    "refusing to mix results: use a new path or --fresh to start over")
            return cls(path)
        _template(spec, route, fingerprint).to_zarr(
            str(path), mode="w-", zarr_format=2, consolidated=True,
            encoding=_encoding(spec))
        return cls(path)

    # ------------------------------------------------------------------ work units
    def blocks(self) -> list[tuple[slice, ...]]:
        """Every chunk of the grid as a tuple of slices, in C order."""
        ranges = [range(0, n, c) for n, c in zip(self.shape, self.chunks)]
        return [tuple(slice(s, min(s + c, n)) for s, c, n in zip(start, self.chunks, self.shape))
                for start in itertools.product(*ranges)]

    def pending_blocks(self, retry_failed: bool = False) -> list[tuple[slice, ...]]:
        """Chunks holding a point that is not yet finished (or failed, with ``retry_failed``)."""
        status = self.group["status"][...]
        out = []
        for block in self.blocks():
            part = status[block]
            if np.any(part == PENDING) or (retry_failed and np.any(part == FAILED)):
                out.append(block)
        return out

    def write_block(self, block: tuple[slice, ...], figures: dict[str, np.ndarray], status: np.ndarray,
                    messages: np.ndarray) -> None:
        """Write one chunk: figures and messages first, the status last (see module docstring)."""
        for name in self.figures:
            self.group[name][block] = np.asarray(figures[name]).reshape(status.shape)
        self.group["message"][block] = np.asarray(messages, dtype=f"<U{MESSAGE_WIDTH}").reshape(status.shape)
        self.group["status"][block] = status.astype(np.int8)

    def counts(self) -> dict[str, int]:
        status = self.group["status"][...]
        return {"pending": int(np.sum(status == PENDING)), "done": int(np.sum(status == DONE)),
                "failed": int(np.sum(status == FAILED))}


def _template(spec, route: str, fingerprint: str) -> xr.Dataset:
    from gqsim.studies.surveys.one_by_one import NOT_APPLICABLE
    from gqsim.studies.surveys.spec import FIGURES, NOISE_LABEL_WIDTH

    dims = tuple(a.label for a in spec.axes)
    shape = spec.shape
    coords = {a.label: xr.Variable(a.label, np.asarray(a.values),
                                   attrs={"key_path": a.path, "spacing": a.spacing}) for a in spec.axes}
    data_vars = {}
    for name in spec.figures:
        unit, text = FIGURES[name]
        if name == "max_log_negativity":
            unit = "ebit (log2)" if spec.base.data.get("output", {}).get("log_base", "2") == "2" else "nat (ln)"
            if spec.base.family == "oscillators":
                unit = "nat (ln)"
        attrs = {"units": unit, "description": text}
        if name in _INT_FIGURES:
            arr = np.full(shape, _INT_FIGURES[name], dtype=np.int8)
        elif name == "dominant_noise":
            arr = np.full(shape, "", dtype=f"<U{NOISE_LABEL_WIDTH}")
        else:
            arr = np.full(shape, np.nan)
        data_vars[name] = xr.Variable(dims, arr, attrs=attrs)
    data_vars["status"] = xr.Variable(dims, np.zeros(shape, dtype=np.int8),
                                      attrs={"flag_values": [PENDING, DONE, FAILED],
                                             "flag_meanings": "pending done failed"})
    data_vars["message"] = xr.Variable(dims, np.full(shape, "", dtype=f"<U{MESSAGE_WIDTH}"),
                                       attrs={"description": "one-line error of a failed point"})
    attrs = {
        "title": spec.title or f"gqsim sweep of {spec.base.source}",
        "family": spec.base.family,
        "route": route,
        "fingerprint": fingerprint,
        "sweep_definition": json.dumps(spec.definition(), sort_keys=True),
        "base_protocol": json.dumps(spec.base.to_dict(), sort_keys=True),
        "base_protocol_source": spec.base.source,
        "package_versions": json.dumps(_versions(), sort_keys=True),
        "axis_labels": json.dumps(list(dims)),
        "figure_names": json.dumps(list(spec.figures)),
        "not_applicable": json.dumps([f for f in NOT_APPLICABLE.get(spec.base.family, ()) if f in spec.figures]),
    }
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def _versions() -> dict:
    versions = package_versions()
    versions.update(xarray=xr.__version__, zarr=zarr.__version__)
    try:  # dask is optional (extra "parallel"); report it only when installed
        import dask
        versions["dask"] = dask.__version__
    except ImportError:
        pass
    return versions


def _encoding(spec) -> dict:
    chunks = chunk_shape(spec.shape, spec.execution.block_points)
    names = [*spec.figures, "status", "message"]
    return {name: {"chunks": chunks} for name in names}


def open_sweep(path: str | Path) -> xr.Dataset:
    """Load a sweep store fully into memory as an :class:`xarray.Dataset` (no dask needed)."""
    path = Path(path)
    if not path.exists():
        raise ProtocolError("store", str(path), "does not exist; run the sweep first")
    try:
        with xr.open_zarr(str(path), consolidated=True, chunks=None, zarr_format=2) as ds:
            return ds.load()
    except (OSError, KeyError, ValueError) as exc:
        raise ProtocolError("store", str(path), f"is not a readable sweep store ({exc})") from None


def export_netcdf(store: str | Path, target: str | Path) -> Path:
    """Write the sweep at ``store`` to a netCDF-4 file at ``target`` and return its path."""
    ds = open_sweep(store)
    target = Path(target)
    ds.to_netcdf(target, engine="netcdf4")
    return target
