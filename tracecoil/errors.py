"""Error types shared by the whole package.

Every error a user can provoke with bad input is a :class:`SpecError` (a
``ValueError``) whose message names the field, the value that arrived and
what is allowed.
"""

from __future__ import annotations

import difflib


class SpecError(ValueError):
    """A design value is missing, malformed or outside its allowed range."""


class GeometryError(ValueError):
    """A design is well-formed but the coil it describes cannot be built."""


def unknown_key_message(table: str, key: str, valid) -> str:
    """Message for an unknown key, suggesting the closest valid one.

    >>> unknown_key_message("coil", "widht_mm", ["width_mm", "gap_mm"])
    "unknown key 'widht_mm' in [coil]; did you mean 'width_mm'? (valid keys: gap_mm, width_mm)"
    """
    close = difflib.get_close_matches(key, list(valid), n=1, cutoff=0.5)
    hint = f"; did you mean {close[0]!r}?" if close else ""
    return f"unknown key {key!r} in [{table}]{hint} (valid keys: {', '.join(sorted(valid))})"
