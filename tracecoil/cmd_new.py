"""``tracecoil new KIND``: copy a bundled example design to start from."""

from __future__ import annotations

from pathlib import Path


def add_parser(sub):
    p = sub.add_parser("new", help="copy an example design to start from", description="Copy a bundled example design (an invented scenario) to a new design file.")
    p.add_argument("kind", nargs="?", help="template name; omit or use --list to see them")
    p.add_argument("--to", metavar="PATH", help="file to write (default: ./KIND.toml)")
    p.add_argument("--list", action="store_true", help="list the templates and exit")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")
    p.set_defaults(run=run)


def run(args) -> int:
    from .errors import SpecError
    from .export.atomic import write_text
    from .templates import design_names, template_path

    if args.list or not args.kind:
        for name in design_names():
            first = template_path(name).read_text().splitlines()[0].lstrip("# ")
            print(f"{name:24s} {first}")
        return 0
    src = template_path(args.kind)
    dst = Path(args.to or f"{src.stem}.toml")
    if dst.exists() and not args.force:
        raise SpecError(f"{dst} already exists; choose another --to or add --force")
    write_text(dst, src.read_text())
    print(f"wrote {dst} (from template {src.stem}); edit it, then run: tracecoil build {dst}")
    return 0
