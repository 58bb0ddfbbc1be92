"""Starting design files for ``simkit new``."""

from __future__ import annotations

_SOURCE = """\
[source]
kind = "sine"
vrms = "{vrms}"            # open-circuit RMS of the winding{each}
frequency = "50"
resistance = "{res}"         # winding + reflected primary resistance{each}
inductance = "0"           # leakage inductance
mains_tolerance = "10%"
"""

_BODY = {
    "half-wave": ('[rectifier]\ntopology = "half-wave"\ndiode = "1N4007"\n\n'
                  '[[filter]]\nc = "100u"\nesr = "0.3"\n', "250", "40", ""),
    "centre-tap": ('[rectifier]\ntopology = "centre-tap"\ndiode = "1N4007"\n\n'
                   '[[filter]]\nc = "47u"\nesr = "0.3"\n[[filter]]\nr = "1k"\n[[filter]]\nc = "47u"\n',
                   "250", "40", " (each half)"),
    "bridge": ('[rectifier]\ntopology = "bridge"\ndiode = "1N4007"\n\n'
               '[[filter]]\nc = "100u"\nesr = "0.3"\n[[filter]]\nl = "5"\ndcr = "100"\n'
               '[[filter]]\nc = "47u"\n', "250", "25", ""),
    "doubler": ('[rectifier]\ntopology = "doubler"\ndiode = "1N4007"\ncapacitance = "220u"\n',
                "120", "5", ""),
    "cascade": ('[rectifier]\ntopology = "cascade"\nstages = 2\ndiode = "1N4007"\n'
                'capacitance = "47u"\n', "120", "5", ""),
}


def template(topology: str) -> str:
    body, vrms, res, each = _BODY[topology]
    return (
        f'title = "New {topology} supply"\n\n'
        + _SOURCE.format(vrms=vrms, res=res, each=each)
        + "\n"
        + body
        + '\n[load]\nkind = "resistor"\nr = "5k"\n\n[bleeder]\nr = "100k"\n'
    )
