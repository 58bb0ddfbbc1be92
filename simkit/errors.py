"""Errors that reach the user, each with its exit code (SPEC section 1)."""

from __future__ import annotations


class SimkitError(Exception):
    """Base of every error simkit reports to the user instead of a traceback."""

    exit_code = 1


class DesignError(SimkitError):
    """The design file (or a --set override) does not parse or does not make sense.

    The message names the file, the key and what was expected.  Exit code 2.
    """

    exit_code = 2

    def __init__(self, problem: str, *, file: str | None = None, key: str | None = None) -> None:
        self.file = file
        self.key = key
        self.problem = problem
        where = ": ".join(part for part in (file, key) if part)
        super().__init__(f"{where}: {problem}" if where else problem)


class UsageError(SimkitError):
    """Bad command-line use that click does not catch itself.  Exit code 2."""

    exit_code = 2


class SimulationError(SimkitError):
    """ngspice could not complete a run.  Exit code 3.

    Keeps the deck and ngspice's own messages so the user can see why.
    """

    exit_code = 3

    def __init__(self, message: str, *, deck: str = "", log: str = "", hint: str = "") -> None:
        self.deck = deck
        self.log = log
        self.hint = hint
        text = message
        if log:
            tail = "\n".join(log.strip().splitlines()[-12:])
            text += f"\nngspice said:\n{tail}"
        if hint:
            text += f"\nWhat to try: {hint}"
        super().__init__(text)


class EngineMissingError(SimulationError):
    """The ngspice shared library cannot be loaded."""
