"""Errors that reach the user, each with its exit code (docs/reference.md, Exit codes)."""

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
        where = ": ".join(shown(part, 120) for part in (file, key) if part)
        text = shown(problem, 600)
        super().__init__(f"{where}: {text}" if where else text)


def shown(text: str, limit: int = 200) -> str:
    """User text as a message shows it: control characters escaped (a file name with a line break
    stays on one line), and cut in the middle when it is longer than ``limit`` characters.

    >>> shown("a\\nb.toml"), shown("x" * 30, 10)
    ('a\\\\nb.toml', 'xxxxxx...x')
    """
    if not text.isprintable():
        text = "".join(ch if ch.isprintable() else repr(ch)[1:-1] for ch in text)
    if len(text) > limit:
        head = max(1, limit * 2 // 3)
        tail = max(1, limit - head - 3)
        text = f"{text[:head]}...{text[-tail:]}"
    return text


class UsageError(SimkitError):
    """Bad command-line use that click does not catch itself.  Exit code 2."""

    exit_code = 2


class OutputError(UsageError):
    """A result file or folder cannot be written: a read-only or full disk, a missing folder, a
    symbolic link or special file where a result should go.  The user's environment, not a bug of
    simkit: exit code 2, and the message names the path."""


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
