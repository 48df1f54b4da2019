"""Generators: build :class:`tracecoil.layout.Coil` objects from specs."""

from .custom import custom_coil
from .spiral import build_coil, default_board_layers, max_turns, spiral

__all__ = ["custom_coil", "build_coil", "default_board_layers", "max_turns", "spiral"]


def coil_from_design(design) -> "Coil":  # noqa: F821 - documented return type
    """Build the :class:`~tracecoil.layout.Coil` a :class:`~tracecoil.design.Design` describes."""
    return build_coil(design.coil, design.board, name=design.name)


__all__.append("coil_from_design")
