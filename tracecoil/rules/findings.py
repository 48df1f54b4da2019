"""What a rule check returns: findings (one per problem location) and the
result that collects them. Rule checks return findings, never raise for a
broken rule.
"""

from __future__ import annotations

from dataclasses import dataclass, field

# Rule names, in the order reports list them.
RULES = (
    "MIN_WIDTH",
    "MIN_GAP",
    "VOLTAGE_SPACING",
    "MIN_DRILL",
    "ANNULAR_RING",
    "VIA_TO_VIA",
    "VIA_TO_TRACE",
    "EDGE_CLEARANCE",
    "TEMPERATURE_RISE",
    "DESIGN_RULES",
)


@dataclass(frozen=True)
class Finding:
    """One broken rule at one place.

    Parameters
    ----------
    rule : str
        One of :data:`RULES`.
    layer : str
        Copper layer name ('top', 'inner1', ..., 'bottom'), or 'drill' for
        hole rules that concern the whole board.
    at : (float, float)
        Where (mm): the middle of the narrowest place.
    measured, limit : float
        The value found and the value the rule requires, in ``unit``.
    message : str
        One line a person can act on.
    unit : str
        'mm' for lengths, 'K' for temperature rise.
    span : tuple of two (x, y) points, or ()
        The two points between which ``measured`` was taken (mm), for
        pictures; empty when the finding is not a distance.
    """

    rule: str
    layer: str
    at: tuple[float, float]
    measured: float
    limit: float
    message: str
    unit: str = "mm"
    span: tuple = ()

    def to_dict(self) -> dict:
        d = {
            "rule": self.rule,
            "layer": self.layer,
            "at_mm": [round(float(self.at[0]), 6), round(float(self.at[1]), 6)],
            "measured": round(float(self.measured), 7),
            "limit": round(float(self.limit), 7),
            "unit": self.unit,
            "message": self.message,
        }
        if self.span:
            d["span_mm"] = [[round(float(v), 6) for v in p] for p in self.span]
        return d


@dataclass
class CheckResult:
    """Findings of a rule check, with the electrical summary and notes.

    ``ok`` is True when there are no findings. ``electrical`` holds one row
    per copper layer (current, width, thickness, temperature rise, current
    for the allowed rise). ``cautions`` are safety lines a report must
    print; ``notes`` are facts worth knowing that break no rule.
    """

    findings: list = field(default_factory=list)
    rules: object = None
    electrical: list = field(default_factory=list)
    measured: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    cautions: list = field(default_factory=list)
    current_a: float = 0.0
    voltage_v: float = 0.0
    tolerance_mm: float = 0.0
    outlines: object = None
    name: str = "coil"

    @property
    def ok(self) -> bool:
        return not self.findings

    def by_rule(self) -> dict:
        """{rule: [findings]} in :data:`RULES` order."""
        out = {}
        for f in sorted(self.findings, key=_order):
            out.setdefault(f.rule, []).append(f)
        return out

    def to_dict(self) -> dict:
        r = self.rules
        return {
            "name": self.name,
            "ok": self.ok,
            "violations": len(self.findings),
            "rules": None if r is None else {k: v for k, v in r.to_dict().items()},
            "current_a": self.current_a,
            "voltage_v": self.voltage_v,
            "tolerance_mm": self.tolerance_mm,
            "findings": [f.to_dict() for f in sorted(self.findings, key=_order)],
            "measured": self.measured,
            "electrical": self.electrical,
            "notes": list(self.notes),
            "cautions": list(self.cautions),
        }


def _order(f: Finding):
    return (RULES.index(f.rule) if f.rule in RULES else len(RULES), f.layer, f.at[0], f.at[1])
