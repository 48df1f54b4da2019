"""Bundled example designs and rule sets (the repository's templates/).

All example designs are invented scenarios for demonstration.
"""

from __future__ import annotations

from pathlib import Path

from .errors import SpecError

TEMPLATE_DIR = Path(__file__).resolve().parent.parent / "templates"


def template_names(prefix: str = "") -> list[str]:
    """Names of bundled templates (file stems), optionally filtered."""
    return sorted(p.stem for p in TEMPLATE_DIR.glob("*.toml") if p.stem.startswith(prefix))


def design_names() -> list[str]:
    return [n for n in template_names() if not n.startswith("rules-")]


def template_path(name: str) -> Path:
    """Path of the bundled template ``name`` (with or without .toml)."""
    stem = name[:-5] if name.endswith(".toml") else name
    p = TEMPLATE_DIR / f"{stem}.toml"
    if not p.is_file():
        raise SpecError(f"no template named {name!r}; available: {', '.join(template_names())}")
    return p
