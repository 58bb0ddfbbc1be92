"""design -> netlist -> engine -> analysis -> figures: one design's results, the core of every command.

:func:`simulate` runs a design; :class:`RunResult` holds what it gives; the decks for
``ngspice -b`` come from :mod:`simkit.pipeline.decks`.
"""

from simkit.pipeline.decks import measure_lines, steady_deck, switch_on_deck
from simkit.pipeline.results import (
    CapacitorResult,
    DiodeResult,
    InductorResult,
    LoadResult,
    PartResult,
    RegulatorResult,
    ResistorResult,
    RunResult,
    WindingResult,
)
from simkit.pipeline.simulate import check_cost, simulate

__all__ = ["CapacitorResult", "DiodeResult", "InductorResult", "LoadResult", "PartResult", "RegulatorResult",
           "ResistorResult", "RunResult", "WindingResult", "check_cost", "measure_lines", "simulate", "steady_deck",
           "switch_on_deck"]
