"""Write every output for one coil: DXF, GDSII, SVG, PNG and JSON summary.

All files of one run appear together or not at all: each is written to a
temporary name in the output directory, and only when every writer has
succeeded are they renamed onto ``<coil name>.<ext>`` (see
:class:`tracecoil.export.atomic.Staging`). A failing writer leaves neither
output files nor temporary files, and files from an earlier run stay as
they were.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

from ..design import Design, load_design
from ..errors import SpecError
from ..layout import Coil
from ..outline import DEFAULT_TOLERANCE_MM, outlines as make_outlines
from .atomic import Staging

FORMATS = ("dxf", "gds", "svg", "png", "json")


def coil_from(design_or_coil) -> Coil:
    """The :class:`Coil` for a Coil, a :class:`Design` or a design file path."""
    if isinstance(design_or_coil, Coil):
        return design_or_coil
    if isinstance(design_or_coil, (str, os.PathLike)):
        design_or_coil = load_design(design_or_coil)
    if isinstance(design_or_coil, Design):
        from ..generators import build_coil

        d = design_or_coil
        return build_coil(d.coil, d.board, name=d.name)
    raise SpecError(f"build needs a Coil, a Design or a design file path; got {type(design_or_coil).__name__}")


def _check_formats(formats) -> tuple[str, ...]:
    if isinstance(formats, str):
        formats = (formats,)
    out = []
    for f in formats:
        if f not in FORMATS:
            raise SpecError(f"formats must be chosen from {', '.join(FORMATS)}; got {f!r}")
        if f not in out:
            out.append(f)
    if not out:
        raise SpecError(f"formats is empty; choose from {', '.join(FORMATS)}")
    return tuple(out)


def _check_name(name: str) -> str:
    if not isinstance(name, str) or not name or name in (".", "..") or any(c in name for c in "/\\\0"):
        raise SpecError(f"coil name {name!r} cannot name a file: use letters, digits, '-' and '_'")
    return name


def _write(fmt: str, coil: Coil, outl, filename: Path, *, layer_map) -> None:
    # Modules are imported here (ezdxf, gdstk, matplotlib load only when used)
    # and looked up at call time.
    if fmt == "dxf":
        from . import dxf

        dxf.save_dxf(outl, filename)
    elif fmt == "gds":
        from . import gds

        gds.save_gds(outl, filename, cell_name=coil.name, layer_map=layer_map)
    elif fmt in ("svg", "png"):
        from . import preview

        preview.save_preview(outl, filename, fmt=fmt, title=coil.name)
    elif fmt == "json":
        from .summary import summary

        text = json.dumps(summary(coil, outlines=outl), indent=2, allow_nan=False) + "\n"
        Path(filename).write_text(text, encoding="utf-8")
    else:  # pragma: no cover - guarded by _check_formats
        raise SpecError(f"unknown format {fmt!r}")


def build(design_or_coil, out_dir="out", *, formats=FORMATS, tolerance_mm: float | None = None, layer_map: dict | None = None) -> dict:
    """Write the outputs of one coil into ``out_dir`` as ``<name>.<ext>``.

    Parameters
    ----------
    design_or_coil : Coil, Design, str or path
        The coil, or a design (object or TOML file) to build it from.
    out_dir : str or path
        Output directory, created if missing (default ``out``).
    formats : iterable of {'dxf', 'gds', 'svg', 'png', 'json'}
        Which files to write (default: all).
    tolerance_mm : float, optional
        Chord tolerance of the copper outlines; default: the coil spec's
        ``tolerance_mm`` (or 0.005 mm for a coil without spec).
    layer_map : dict, optional
        GDSII layer map overrides, see :func:`tracecoil.export.gds.gds_library`.

    Returns
    -------
    dict
        {format: Path of the written file}.

    Raises
    ------
    SpecError
        For an unknown format, an unusable name or a bad layer map. Any
        error from a writer propagates after all of this run's files are
        removed.

    >>> import tempfile
    >>> from tracecoil import spiral
    >>> coil = spiral(shape="square", outer_mm=10, turns=3, width_mm=0.3, gap_mm=0.3, name="demo")
    >>> paths = build(coil, tempfile.mkdtemp(), formats=("dxf", "json"))
    >>> sorted(p.name for p in paths.values())
    ['demo.dxf', 'demo.json']
    """
    coil = coil_from(design_or_coil)
    formats = _check_formats(formats)
    name = _check_name(coil.name)
    if tolerance_mm is None:
        tolerance_mm = getattr(coil.spec, "tolerance_mm", DEFAULT_TOLERANCE_MM)
    outl = make_outlines(coil, tolerance_mm=tolerance_mm)
    if "gds" in formats:
        from .gds import resolve_layer_map

        resolve_layer_map(outl, layer_map)  # fail before creating anything
    out = Path(out_dir)
    created = not out.exists()
    out.mkdir(parents=True, exist_ok=True)
    targets = {fmt: out / f"{name}.{fmt}" for fmt in formats}
    try:
        with Staging() as stage:
            for fmt in formats:
                _write(fmt, coil, outl, stage.path(targets[fmt]), layer_map=layer_map)
    except BaseException:
        if created:
            try:
                out.rmdir()  # only if this run made it and left it empty
            except OSError:
                pass
        raise
    return targets
