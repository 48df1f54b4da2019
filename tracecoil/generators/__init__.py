"""Generators: build :class:`tracecoil.layout.Coil` objects from specs."""

from .spiral import build_coil, default_board_layers, max_turns, spiral

__all__ = ["build_coil", "default_board_layers", "max_turns", "spiral"]
