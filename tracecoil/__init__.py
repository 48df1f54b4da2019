"""tracecoil: design, export, check and predict printed-circuit-board coils.

The public API, re-exported from the modules that define it.
"""

__version__ = "0.1.0"

from .design import BoardSpec, CoilSpec, Design, load_design
from .errors import GeometryError, SpecError
from .export import build, summary
from .generators import build_coil, coil_from_design, custom_coil, max_turns, spiral
from .layout import Coil, Stackup, Step, Terminal, Trace, Via
from .predict import Prediction, frequency_sweep, predict
from .rules import CheckResult, Finding, RuleSet, check, load_rules
from .targets import BlockMagnet, Circular, CylinderMagnet, Dipole, Linear, Table, signal
from .targets.conductive import Plate, plate_signal
from .targets.coupling import receiver_signal
from .physics.conductors import Conductors, conductors
from .physics.field import field, flux_linkage, vector_potential
from .physics.inductance import ImpedanceResult, InductanceResult, coupling, impedance, inductance, mutual_inductance
from .variants import evaluate, size, sweep, tolerance
