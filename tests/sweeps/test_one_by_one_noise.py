"""The ``dominant_noise`` figure is the dominant source of each point's noise budget
(gqsim.studies.decoherence), environment sources included."""

import numpy as np

from gqsim.physics.environment.tally import dominant_source
from gqsim.studies.surveys import run_sweep

from .helpers import small_sweep


def test_gas_dominates_the_hollowmere_cryostat_map(tmp_path):
    """The bundled Hollowmere protocol decoheres through helium collisions (its noise budget
    gives gas ~99.99 % of the rate at 1e-10 Pa); the figure once said "none" because it looked
    only at the bodies' own dephasing tables. At 1e-20 Pa the blackbody terms take over."""
    spec = small_sweep([{"path": "environment.gas.pressure_pa", "label": "p", "values": [1e-20, 1e-10]}],
                       base_protocol="hollowmere-cryostat.toml")
    ds = run_sweep(spec, tmp_path / "gas.zarr", executor="serial")
    assert (ds.status.values == 1).all()
    assert ds.dominant_noise.values[1] == "gas collisions"
    assert ds.dominant_noise.values[0].startswith("blackbody")


def test_no_decoherence_is_none_and_ties_keep_budget_order():
    """Budget order decides ties (the first listed source wins); no positive rate gives "none"."""
    assert dominant_source([]) == "none"
    assert dominant_source([("a", 0.0), ("b", 0.0)]) == "none"
    assert dominant_source([("a", 1.0), ("b", 1.0), ("c", 0.5)]) == "a"
    assert dominant_source([("a", 1.0), ("b", np.nextafter(1.0, 2.0))]) == "b"
