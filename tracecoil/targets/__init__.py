"""Targets that move near a coil and the signals they produce.

* :mod:`~tracecoil.targets.magnets` -- permanent magnets (point dipole,
  axially magnetised cylinder, block) with closed-form fields and vector
  potentials, and a table of remanence by grade;
* :mod:`~tracecoil.targets.motion` -- straight, circular and tabulated
  motions that turn time into poses;
* :mod:`~tracecoil.targets.flux` -- flux linkage of a coil with a magnet
  over many poses (line integral of the magnet's vector potential);
* :mod:`~tracecoil.targets.signal` -- ``signal(coil, target, motion)``:
  EMF waveforms (open circuit and into a load) and their writers.

Conductive targets (eddy currents) live in ``conductive.py`` and coil-to-coil
coupling in ``coupling.py``; :func:`signal` dispatches to them.
"""

from .magnets import GRADES, BlockMagnet, CylinderMagnet, Dipole, remanence
from .motion import Circular, Linear, Table
from .flux import flux_linkage
from .signal import MagnetSignal, signal

__all__ = [
    "GRADES",
    "BlockMagnet",
    "CylinderMagnet",
    "Dipole",
    "remanence",
    "Circular",
    "Linear",
    "Table",
    "flux_linkage",
    "MagnetSignal",
    "signal",
]
