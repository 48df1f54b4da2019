"""Physics of PCB coils: conductor model, magnetic field, inductance, impedance.

Modules (import them by name; this package deliberately re-exports nothing,
so that ``tracecoil.physics.inductance`` and ``tracecoil.physics.field``
stay the modules rather than the functions of the same names):

* ``conductors``: a :class:`~tracecoil.layout.Coil` (millimetres) as straight
  segments in SI units;
* ``kernels``: the pure-array formulas (Biot-Savart, Neumann, Hoer & Love);
* ``field``: B, A and flux linkage of a coil;
* ``inductance``: partial-inductance model, mutual inductance, coupling,
  impedance with skin and proximity effect;
* ``resistance``, ``capacitance``, ``circuit``, ``materials``.
"""
