"""Morse timing: which spans of a repeated text are key-down, in dot units (ITU-R M.1677-1).

The Recommendation fixes the element and gap lengths: a dash is three dots; the space between
the signals of one character is one dot, between characters three dots, between words seven
dots.  Speed in words per minute uses the operating convention of the standard word "PARIS",
50 dot units long, so one dot lasts 1.2/wpm seconds (common practice).
"""

from __future__ import annotations

#: ITU-R M.1677-1, Part I, section 1: letters, figures and the punctuation the Recommendation lists.
MORSE: dict[str, str] = {
    "A": ".-", "B": "-...", "C": "-.-.", "D": "-..", "E": ".", "F": "..-.", "G": "--.", "H": "....",
    "I": "..", "J": ".---", "K": "-.-", "L": ".-..", "M": "--", "N": "-.", "O": "---", "P": ".--.",
    "Q": "--.-", "R": ".-.", "S": "...", "T": "-", "U": "..-", "V": "...-", "W": ".--", "X": "-..-",
    "Y": "-.--", "Z": "--..",
    "1": ".----", "2": "..---", "3": "...--", "4": "....-", "5": ".....", "6": "-....", "7": "--...",
    "8": "---..", "9": "----.", "0": "-----",
    ".": ".-.-.-", ",": "--..--", ":": "---...", "?": "..--..", "'": ".----.", "-": "-....-",
    "/": "-..-.", "(": "-.--.", ")": "-.--.-", '"': ".-..-.", "=": "-...-", "+": ".-.-.", "@": ".--.-.",
}

#: Seconds per dot at one word per minute ("PARIS": 50 dots a word, common practice).
DOT_AT_1_WPM = 1.2


def morse_problem(text: str) -> str | None:
    """Why a text cannot be sent (None when it can)."""
    if not text.strip():
        return "the Morse text is empty"
    if len(text) > 500:
        return f"the Morse text is {len(text)} characters long; keep it under 500"
    bad = sorted({c for c in text.upper() if c != " " and c not in MORSE})
    if bad:
        shown = ", ".join(repr(c) for c in bad[:5])
        return f"no Morse code for {shown} (ITU-R M.1677-1 letters, figures and . , : ? ' - / ( ) \" = + @)"
    return None


def morse_elements(text: str) -> tuple[list[tuple[int, int]], int]:
    """Key-down elements of a text in dot units, and the length of one repetition.

    Returns ``([(start, length), ...], cycle)``: each element starts ``start`` units after the
    beginning and lasts ``length`` units (1 for a dot, 3 for a dash).  The cycle ends with a
    word space (7 units) so that repetitions are separate words.
    """
    words = text.upper().split()
    t = 0
    out: list[tuple[int, int]] = []
    for wi, word in enumerate(words):
        if wi:
            t += 7 - 1  # a word space: seven units after the last element
        for ci, ch in enumerate(word):
            if ci:
                t += 3 - 1  # a character space replaces the element space already added
            code = MORSE[ch]
            for ei, sym in enumerate(code):
                if ei:
                    t += 1
                length = 1 if sym == "." else 3
                out.append((t, length))
                t += length
            t += 1  # element space; corrected above at character and word boundaries
    # After the last element: a word space before the text repeats.
    cycle = t - 1 + 7
    return out, cycle


def keying_elements(text: str, wpm: float) -> tuple[list[tuple[float, float]], float]:
    """Key-down spans of a text sent at ``wpm``, in seconds: ``([(start, length), ...], cycle)``."""
    unit = DOT_AT_1_WPM / wpm
    elements, cycle = morse_elements(text)
    return [(s * unit, n * unit) for s, n in elements], cycle * unit
