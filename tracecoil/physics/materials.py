"""Material constants used by the physics kernels (SI units).

Every number carries its source. "(from memory)" marks a value recalled
rather than read from the cited document; "common practice" marks a rule
of thumb. Values are at 20 degC unless stated.

>>> round(copper_resistivity(20.0) * 1e8, 4)
1.7241
>>> round(copper_resistivity(100.0) / copper_resistivity(20.0), 4)
1.3144
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import scipy.constants

from ..errors import SpecError

# Vacuum permeability and permittivity (H/m, F/m): CODATA 2018 values as
# shipped by scipy.constants (since the 2019 SI redefinition mu0 is measured,
# 4*pi*1e-7 to within 1e-9 relative).
MU0 = float(scipy.constants.mu_0)
EPS0 = float(scipy.constants.epsilon_0)

# Annealed copper, International Annealed Copper Standard (100 % IACS):
# 1/58 ohm mm^2/m = 1.7241e-8 ohm m at 20 degC, IEC 60028:1925
# "International standard of resistance for copper" (from memory).
# Electrodeposited PCB copper is typically 0-10 % more resistive (common
# practice); pure annealed copper is about 1.678e-8 ohm m (from memory).
COPPER_RESISTIVITY_20C = 1.7241e-8

# Temperature coefficient of resistance of annealed copper at 20 degC,
# 0.00393 per kelvin (IEC 60028, from memory). The linear law
# rho(T) = rho20 * (1 + alpha (T - 20)) is good to about 1 % between
# -50 and +150 degC (common practice).
COPPER_TEMPCO_PER_K = 0.00393

# Range where the linear law above is used without a warning (degC).
LINEAR_TEMPCO_RANGE_C = (-50.0, 150.0)

# Relative permittivity of FR-4 glass-epoxy laminate near 1 MHz: 4.2-4.8,
# depending on resin content and frequency (common practice); 4.5 is the
# layout default.
FR4_PERMITTIVITY_RANGE = (4.2, 4.8)


@dataclass(frozen=True)
class ConductorMaterial:
    """Bulk electrical properties of a conducting material.

    Parameters
    ----------
    name : str
        Plain name.
    conductivity_s_m : float
        Electrical conductivity at 20 degC (S/m).
    mu_r : float
        Relative permeability used for eddy-current and skin-depth
        calculations (1 for non-magnetic metals).
    source : str
        Where the numbers come from.
    """

    name: str
    conductivity_s_m: float
    mu_r: float
    source: str

    @property
    def resistivity_ohm_m(self) -> float:
        return 1.0 / self.conductivity_s_m


CONDUCTORS = {
    "copper": ConductorMaterial(
        "copper",
        1.0 / COPPER_RESISTIVITY_20C,
        1.0,
        "100 % IACS annealed copper, IEC 60028 (from memory)",
    ),
    "aluminium": ConductorMaterial(
        "aluminium",
        3.5e7,
        1.0,
        "pure aluminium ~3.5e7-3.77e7 S/m, alloys such as 6061 ~2.5e7 S/m "
        "(CRC Handbook of Chemistry and Physics, from memory)",
    ),
    "brass": ConductorMaterial(
        "brass",
        1.5e7,
        1.0,
        "brass 1.5e7 S/m, varies with zinc content (CRC Handbook, from memory)",
    ),
    "stainless_steel": ConductorMaterial(
        "stainless_steel",
        1.4e6,
        1.0,
        "austenitic stainless steel (304) 1.4e6 S/m, mu_r ~ 1 when annealed; "
        "cold-worked parts can be weakly magnetic (from memory)",
    ),
}


def copper_resistivity(temperature_c=20.0):
    """Resistivity of copper at a temperature (ohm m).

    rho(T) = rho20 * (1 + alpha (T - 20 degC)) with rho20 = 1.7241e-8 ohm m
    and alpha = 0.00393 / K (100 % IACS copper, IEC 60028, from memory).

    Parameters
    ----------
    temperature_c : float or ndarray
        Conductor temperature (degC). Outside -50..150 degC the linear law
        is less accurate and a ``UserWarning`` is issued.

    Returns
    -------
    float or ndarray
        Resistivity (ohm m), same shape as ``temperature_c``.

    >>> round(copper_resistivity(-20.0) * 1e8, 4)
    1.4531
    """
    t = np.asarray(temperature_c, dtype=float)
    lo, hi = LINEAR_TEMPCO_RANGE_C
    if np.any((t < lo) | (t > hi)):
        warnings.warn(
            f"temperature_c {temperature_c} is outside {lo}..{hi} degC where the linear "
            "copper temperature coefficient is accurate to ~1 %",
            UserWarning,
            stacklevel=2,
        )
    rho = COPPER_RESISTIVITY_20C * (1.0 + COPPER_TEMPCO_PER_K * (t - 20.0))
    if np.any(rho <= 0.0):
        raise SpecError(
            f"temperature_c must be above {20.0 - 1.0 / COPPER_TEMPCO_PER_K:.1f} degC for the "
            f"linear copper model; got {temperature_c}"
        )
    return float(rho) if rho.ndim == 0 else rho
