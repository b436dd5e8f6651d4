"""The decoherence tally of a run: every channel of every body with its rate and share.

Plain data shared by both model families (each computes its own lines) and by the studies that
read them; no physics is computed here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True, kw_only=True)
class BudgetLine:
    """One channel of one body at the separation that matters (the body's largest branch separation)."""

    body: str
    source: str
    rate_per_s: float
    share: float
    separation_m: float
    localisation_per_m2_s: float | None
    saturation_per_s: float | None
    driver: str | None
    reference: str


@dataclass(frozen=True, kw_only=True)
class NoiseBudget:
    """All channels of a protocol, their shares, and any root-found limits."""

    lines: tuple[BudgetLine, ...]
    limits: tuple[Limit, ...] = ()
    notes: tuple[str, ...] = ()
    title: str = ""
    quantity: str = "coherence decay rate F(Delta) [1/s]"

    def total_per_s(self, body: str) -> float:
        return sum(line.rate_per_s for line in self.lines if line.body == body)

    def dominant(self, body: str) -> BudgetLine:
        return max((line for line in self.lines if line.body == body), key=lambda line: line.rate_per_s)

    def as_text(self) -> str:
        """Plain-text table: per body, each channel's F(Delta) [1/s] and share."""
        out = [f"noise budget{': ' + self.title if self.title else ''}"]
        bodies = list(dict.fromkeys(line.body for line in self.lines))
        if not bodies:
            out.append("no decoherence channels: every coherence is kept (closed system)")
        for body in bodies:
            lines = sorted((ln for ln in self.lines if ln.body == body), key=lambda ln: -ln.rate_per_s)
            sep = lines[0].separation_m if lines else float("nan")
            where = f"branch separation {sep:.4g} m" if math.isfinite(sep) else "trapped mode"
            out.append(f"{body} ({where}): total {self.total_per_s(body):.4g} ({self.quantity})")
            out.append(f"  {'channel':<28}{'rate':>12}{'share':>9}  driver")
            for ln in lines:
                out.append(f"  {ln.source:<28}{ln.rate_per_s:>12.4g}{100 * ln.share:>8.1f}%  {ln.driver or '-'}")
        for lim in self.limits:
            out.append(f"largest tolerable {lim.knob}: {lim.value:.4g} {lim.unit} (now {lim.current:.4g} {lim.unit}; "
                       f"{lim.status}; certificate {lim.certificate}; {lim.evaluations} simulations)")
        out.extend(f"note: {n}" for n in self.notes)
        return "\n".join(out)

    def summary_rows(self) -> dict:
        """The short form a run record carries: every channel with its rate, share and driver."""
        rows = [{"body": ln.body, "channel": ln.source, "rate": ln.rate_per_s, "share": ln.share,
                 "driver": ln.driver or "-"} for ln in self.lines]
        return {"quantity": self.quantity, "rows": rows}

    def to_json_dict(self) -> dict:
        return {
            "title": self.title,
            "quantity": self.quantity,
            "channels": [{"body": ln.body, "channel": ln.source, "rate_per_s": ln.rate_per_s, "share": ln.share,
                          "separation_m": ln.separation_m, "localisation_per_m2_s": ln.localisation_per_m2_s,
                          "saturation_per_s": ln.saturation_per_s, "driver": ln.driver, "reference": ln.reference}
                         for ln in self.lines],
            "limits": [lim.to_json_dict() for lim in self.limits],
            "notes": list(self.notes),
        }


def dominant_source(pairs) -> str:
    """The source of the largest rate among (source, rate) pairs, in budget order (the first wins
    a tie); ``"none"`` when no rate is positive. The sweeps' ``dominant_noise`` figure."""
    best, best_rate = "none", 0.0
    for source, rate in pairs:
        if rate > best_rate:
            best, best_rate = source, rate
    return best
