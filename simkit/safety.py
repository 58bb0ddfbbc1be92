"""The high-voltage cautions every output a builder reads carries, declared once.

Reports list them point by point (:data:`CAUTION_POINTS`); terminal output prints them as one
paragraph (:data:`CAUTIONS`).  They defer to local electrical codes and licensed practice.
"""

from __future__ import annotations

import textwrap

#: The cautions, one point each.
CAUTION_POINTS: tuple[str, ...] = (
    "These supplies can kill. The figures are a simulation, not a guarantee that a built supply is safe.",
    "Stored charge: capacitors keep their charge after switch-off, sometimes for minutes. "
    "Discharge every capacitor through a resistor, then measure, before touching.",
    "Bleeders: fit one across the output, but never trust it alone; it can be open.",
    "Insulation: insulate and enclose every live part; rate wiring, sockets and parts for the "
    "voltage at high mains and at switch-on.",
    "Fusing and earthing: fuse the supply (slow-blow, because of the switch-on surge) and earth "
    "the chassis.",
    "One hand rule: work with one hand in your pocket, on an insulated floor, and never alone.",
    "Follow your local electrical codes, and have mains wiring done or checked by a licensed "
    "person where the law requires it.",
)

#: The cautions as one paragraph, for the terminal.
CAUTIONS: str = textwrap.fill("HIGH VOLTAGE: " + " ".join(CAUTION_POINTS), width=88)
