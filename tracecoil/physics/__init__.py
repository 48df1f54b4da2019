"""Physics of PCB coils: conductor model, magnetic field, inductance, impedance.

``conductors`` turns a :class:`~tracecoil.layout.Coil` (millimetres) into
straight segments in SI units; ``kernels`` holds the pure-array formulas
(Biot-Savart, Neumann, Hoer & Love); ``field``, ``inductance`` and the
other modules here (resistance, capacitance, circuit, materials) build the
coil-level quantities on top of them.
"""

from .conductors import Conductors, conductors
from .field import field, flux_linkage, vector_potential
from .inductance import ImpedanceResult, InductanceResult, coupling, impedance, inductance, mutual_inductance

__all__ = [
    "Conductors",
    "conductors",
    "field",
    "vector_potential",
    "flux_linkage",
    "inductance",
    "mutual_inductance",
    "coupling",
    "impedance",
    "InductanceResult",
    "ImpedanceResult",
]
