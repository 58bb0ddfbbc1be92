"""Load a design: read the file, apply ``--set`` overrides, build and validate the :class:`Design`.

The pieces live in :mod:`simkit.design.files` (reading files, ``--set``) and
:mod:`simkit.design.reader` (the generic reader of every section); this module joins them
and is what commands and the Python API call.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from simkit.design.files import (
    MAX_DEPTH,
    MAX_DESIGN_BYTES,
    apply_overrides,
    parse_toml_text,
    read_design_bytes,
    read_design_text,
    read_toml,
)
from simkit.design.model import Design
from simkit.design.reader import MAX_TITLE, design_from_dict, design_to_inputs

__all__ = ["MAX_DEPTH", "MAX_DESIGN_BYTES", "MAX_TITLE", "apply_overrides", "design_from_dict", "design_to_inputs",
           "load_design", "parse_toml_text", "read_design_bytes", "read_design_text", "read_toml"]


def load_design(path: str | Path, overrides: Sequence[str] = ()) -> Design:
    """Load and validate a design file.

    Parameters
    ----------
    path : str or Path
        The TOML design file.
    overrides : sequence of str
        ``PATH=VALUE`` strings as given to ``--set``.
    """
    data = read_toml(path)
    data = apply_overrides(data, overrides, str(path))
    return design_from_dict(data, origin=str(path))
