"""Fabrication rule checks: rule sets, geometric checks on the copper,
IPC-2221 electrical limits, reports, fitting turns under a rule set, and
reading outlines made elsewhere (DXF, GDSII).

>>> from tracecoil import spiral
>>> from tracecoil.rules import check
>>> check(spiral(shape="circle", outer_mm=12, turns=4, width_mm=0.25, gap_mm=0.25), "standard").ok
True
"""

from .check import CHECK_TOLERANCE_MM, check, geometry_only
from .findings import RULES, CheckResult, Finding
from .geometry import IGNORE_ANGLE_DEG, LIMIT_TOL_MM
from .ruleset import RuleSet, design_rules, load_rules, rule_set_names, rules_from_dict

__all__ = [
    "CHECK_TOLERANCE_MM",
    "IGNORE_ANGLE_DEG",
    "LIMIT_TOL_MM",
    "RULES",
    "CheckResult",
    "Finding",
    "RuleSet",
    "check",
    "design_rules",
    "geometry_only",
    "load_rules",
    "rule_set_names",
    "rules_from_dict",
]
