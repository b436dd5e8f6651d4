"""One-by-one route: build the protocol of each grid point, run ``gqsim.simulate`` and read
the figures of merit off its :class:`~gqsim.record.Result`. Works for every family; the
batched route is checked against it.

Figures that do not apply to a family are stored as NaN and listed in the dataset
attribute ``not_applicable`` (never silently: the status of the point is still "done").
"""

from __future__ import annotations

import math
from typing import Mapping

import numpy as np

from gqsim.errors import GqsimError
from gqsim.physics.measures import partial_transpose
from gqsim.families import simulate
from gqsim.protocol.reader import Protocol, parse_protocol
from gqsim.studies.surveys.spec import CERTIFICATION_FIGURES

__all__ = ["evaluate_point", "NOT_APPLICABLE"]

#: family -> figures stored as NaN because the family does not define them
NOT_APPLICABLE = {
    "superposition": (),
    "oscillators": ("entangling_rate_rad_s", "dephasing_threshold_per_s"),
}


def _with_log_negativity(protocol: Protocol) -> Protocol:
    """Superposition protocols may list their own measures; the sweep needs E_N among them."""
    measures = protocol.data.get("output", {}).get("measures")
    if protocol.family != "superposition" or measures is None or "log_negativity" in measures:
        return protocol
    data = protocol.to_dict()
    data["output"]["measures"] = [*measures, "log_negativity"]
    return parse_protocol(data, source=protocol.source)


def evaluate_point(protocol: Protocol, figures: tuple = (), certification: Mapping | None = None) -> dict:
    """Figures of merit of one protocol; ``dominant_noise`` is the source with the largest rate
    in the run's noise budget (gqsim.studies.decoherence.dominant_source).

    The certification figures are computed only when listed in ``figures`` (they plan a
    measurement with :func:`gqsim.studies.certification.plan.certify_result`; ``certification`` holds its
    ``confidence`` and ``overhead_s``). Raises the GqsimError of the failing stage for an
    invalid point (the runner records it).
    """
    from gqsim.physics.environment.tally import dominant_source
    from gqsim.record import first_near_max

    protocol = _with_log_negativity(protocol)
    result = simulate(protocol)
    times = result.times_s
    en = np.asarray(result.series["log_negativity"])
    k = int(first_near_max(en))
    summary = result.summary.get("log_negativity", {})
    entangled = summary.get("signals_entanglement")
    if entangled is None:
        entangled = bool(np.any(en > 0))
    out = {
        "max_log_negativity": float(en[k]),
        "time_of_max_s": float(times[k]),
        "entangled": int(bool(entangled)),
        "min_pt_eigenvalue": math.nan,
        "entangling_rate_rad_s": math.nan,
        "dephasing_threshold_per_s": math.nan,
        "dominant_noise": dominant_source((row["channel"], row["rate"])
                                          for row in result.summary["noise_budget"]["rows"]),
    }
    if protocol.family == "superposition":
        states = result.states
        pt = partial_transpose(states, result.dims)
        lam = np.linalg.eigvalsh(0.5 * (pt + pt.conj().transpose(0, 2, 1)))[:, 0]
        out["min_pt_eigenvalue"] = float(np.min(lam[times > 0]))
        phase = result.summary["entangling_phase"]
        out["entangling_rate_rad_s"] = float(phase["analytic_rate_rad_s"])
        out["dephasing_threshold_per_s"] = float(phase["dephasing_threshold_per_s"])
    elif "simon_min_eigenvalue" in result.series:
        out["min_pt_eigenvalue"] = float(np.min(np.asarray(result.series["simon_min_eigenvalue"])[times > 0]))
    if set(CERTIFICATION_FIGURES) & set(figures):
        out.update(_certification(protocol, result, certification or {}))
    return out


def _certification(protocol: Protocol, result, options: Mapping) -> dict:
    """Best time, total repetitions and lab time of the family's main witness (gqsim.studies.certification.plan)."""
    from gqsim.studies.certification.plan import CertifyOptions, certify_result, oscillator_covariances

    kwargs = {"overhead_s": float(options.get("overhead_s", 0.0)),
              "confidence": float(options.get("confidence", 0.999))}
    if protocol.family == "oscillators":
        cov, scale = oscillator_covariances(protocol, result)
        report = certify_result(result, CertifyOptions(builtin=("duan",), **kwargs), covariances=cov,
                                position_scale_m=scale)
    else:
        report = certify_result(result, CertifyOptions(builtin=("optimal_ppt",), **kwargs))
    row = report.rows()[0]
    if not row["certifiable"]:
        return {"certification_time_s": math.nan, "certification_repetitions": math.inf,
                "certification_lab_time_s": math.inf}
    return {"certification_time_s": float(row["best_time_s"]),
            "certification_repetitions": float(row["total_repetitions"]),
            "certification_lab_time_s": float(row["lab_time_s"])}


def safe_evaluate(protocol_or_error, figures: tuple = (), certification: Mapping | None = None
                  ) -> tuple[dict | None, str]:
    """(figures, "") or (None, one-line message) for a point that failed."""
    if isinstance(protocol_or_error, GqsimError):
        return None, str(protocol_or_error)
    try:
        return evaluate_point(protocol_or_error, figures, certification), ""
    except GqsimError as exc:
        return None, f"{type(exc).__name__}: {exc}"
