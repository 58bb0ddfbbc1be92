"""``simkit hash``: the design's turn-off ringing and hash, a snubber suggested for it, and the design with it."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from simkit.design.model import Design
from simkit.engine.ngspice import Engine
from simkit.pipeline.noise import Suggestion, suggest_snubber, with_snubber
from simkit.pipeline.results import RunResult
from simkit.pipeline.simulate import simulate


@dataclass
class HashStudy:
    """``simkit hash``: the design with the high-frequency analysis, a suggested snubber, and the design
    with it (None when nothing is suggested)."""

    before: RunResult
    suggestion: Suggestion | None
    after: RunResult | None

    def to_json(self) -> dict[str, Any]:
        def figures(r: RunResult) -> dict[str, Any]:
            doc = r.to_json()
            diodes = {k: {q: v.get(q) for q in ("piv_v", "ring_frequency_hz", "ring_peak_v", "ring_decay_s")}
                      for k, v in doc["parts"].items() if "ring_peak_v" in v}
            keep = ("hash_rms_v", "hash_dbuv", "hum_dbv", "hum_frequency_hz", "vout_dc_v", "ripple_pp_v")
            return {"metrics": {k: doc["metrics"].get(k) for k in keep}, "diodes": diodes,
                    "high_frequency": doc.get("high_frequency"), "warnings": doc["warnings"]}

        return {"design": self.before.design.title, "before": figures(self.before),
                "suggestion": self.suggestion.to_json() if self.suggestion is not None else None,
                "after": figures(self.after) if self.after is not None else None}


def hash_study(design: Design, engine: Engine | None = None) -> HashStudy:
    """Simulate the design with the high-frequency analysis, suggest a snubber across each diode, and
    simulate the design with it."""
    before = simulate(design, engine, hash=True)
    suggestion = suggest_snubber(design, before.metrics.get("diode_piv_v", 0.0))
    after = None if suggestion is None else simulate(with_snubber(design, suggestion.snubber), engine, hash=True)
    return HashStudy(before, suggestion, after)
