"""Atomic file output: a run that fails leaves no half-written file.

Every file tracecoil writes goes first to a temporary file in the *same
directory* as its target (so the final rename never crosses a file system)
and is moved into place with :func:`os.replace`, which is atomic on POSIX
and Windows: a reader sees either the old file or the complete new one.

Three ways in, all built on :class:`Staging`:

* :func:`atomic_path` -- for writers that want a file *name* (ezdxf's
  ``saveas``, gdstk's ``write_gds``, matplotlib's ``savefig``);
* :func:`atomic_open` -- for writers that want an open file object;
* :func:`write_text`, :func:`write_bytes`, :func:`write_json` -- one call;
* :class:`Staging` -- several files that must appear together: each is
  written to its own temporary name and all are renamed only after every
  writer has succeeded. If any writer raises, every temporary file is
  removed and no target is touched.

Temporary names are hidden (``.<name>.<random>.tmp``), created with
``O_EXCL`` so two runs never share one, and with the usual permissions
(0o666 less the umask), which the final file keeps.

>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> write_text(d / "a.txt", "hello").name
'a.txt'
>>> sorted(p.name for p in d.iterdir())
['a.txt']
>>> try:
...     with atomic_open(d / "b.txt") as f:
...         _ = f.write("half")
...         raise RuntimeError("writer failed")
... except RuntimeError:
...     pass
>>> sorted(p.name for p in d.iterdir())
['a.txt']
"""

from __future__ import annotations

import contextlib
import json
import os
import secrets
from pathlib import Path

TEMP_SUFFIX = ".tmp"


def _temp_name(target: Path) -> Path:
    return target.with_name(f".{target.name}.{secrets.token_hex(4)}{TEMP_SUFFIX}")


def _create_temp(target: Path) -> Path:
    """Create an empty, exclusive temporary file next to ``target``."""
    for _ in range(100):
        tmp = _temp_name(target)
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:  # pragma: no cover - 32 random bits collided
            continue
        os.close(fd)
        return tmp
    raise FileExistsError(f"could not create a temporary file next to {target}")  # pragma: no cover


def _fsync(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _unlink(path: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        os.unlink(path)


class Staging:
    """Write several files; make them all appear, or none.

    Use as a context manager. :meth:`path` reserves a temporary file for a
    target and returns its name; write the complete content there. On a
    clean exit every temporary file is synced to disk and renamed onto its
    target; if the block raises, all temporary files are removed and the
    targets are left as they were.

    Parameters
    ----------
    fsync : bool
        Flush each file to disk before renaming (default True), so a power
        cut cannot leave a renamed but empty file.

    Notes
    -----
    The renames happen one after another once every writer has succeeded.
    A rename is a directory update that practically cannot fail then (same
    directory, file already complete); if one does, the targets already
    renamed in this run are removed again, so the run leaves none of its
    outputs rather than a mix of new and old files, and the error is raised.

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with Staging() as stage:
    ...     stage.path(d / "x.txt").write_text("x")
    ...     stage.path(d / "y.txt").write_text("y")
    1
    1
    >>> sorted(p.name for p in d.iterdir())
    ['x.txt', 'y.txt']
    """

    def __init__(self, *, fsync: bool = True):
        self.fsync = fsync
        self._pending: list[tuple[Path, Path]] = []  # (temporary, target)
        self.committed: list[Path] = []

    def path(self, target) -> Path:
        """Reserve and return a temporary file name for ``target``."""
        target = Path(target)
        if any(t == target for _, t in self._pending):
            raise ValueError(f"target {str(target)!r} is already staged in this run")
        tmp = _create_temp(target)
        self._pending.append((tmp, target))
        return tmp

    def discard(self) -> None:
        """Remove every temporary file not yet renamed."""
        for tmp, _ in self._pending:
            _unlink(tmp)
        self._pending.clear()

    def commit(self) -> list[Path]:
        """Rename every staged file onto its target; return the targets."""
        try:
            if self.fsync:
                for tmp, _ in self._pending:
                    _fsync(tmp)
            done = []
            for tmp, target in self._pending:
                try:
                    os.replace(tmp, target)
                except BaseException:
                    for t in done:
                        _unlink(t)
                    raise
                done.append(target)
        finally:
            self.discard()
        self.committed.extend(done)
        return done

    def __enter__(self) -> "Staging":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.commit()
        else:
            self.discard()


@contextlib.contextmanager
def atomic_path(target, *, fsync: bool = True):
    """Context manager yielding a temporary file name for ``target``.

    Write the whole file to the yielded path; on a clean exit it replaces
    ``target`` atomically, on an exception it is removed.

    Writers that choose a format from the file name's extension must be
    told the format (e.g. ``fig.savefig(tmp, format="png")``): the
    temporary name ends in ``.tmp``.
    """
    with Staging(fsync=fsync) as stage:
        yield stage.path(target)


@contextlib.contextmanager
def atomic_open(target, mode: str = "w", *, encoding: str | None = None, newline: str | None = None, fsync: bool = True):
    """Context manager yielding an open file whose content replaces
    ``target`` atomically when the block exits cleanly.

    ``mode`` is 'w' (text, UTF-8 unless ``encoding`` is given) or 'wb'.
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"mode must be 'w' or 'wb'; got {mode!r}")
    if mode == "w" and encoding is None:
        encoding = "utf-8"
    with atomic_path(target, fsync=fsync) as tmp:
        with open(tmp, mode, encoding=encoding, newline=newline) as f:
            yield f


def write_text(target, text: str, *, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``target`` atomically; return the target path."""
    with atomic_open(target, "w", encoding=encoding) as f:
        f.write(text)
    return Path(target)


def write_bytes(target, data: bytes) -> Path:
    """Write ``data`` to ``target`` atomically; return the target path."""
    with atomic_open(target, "wb") as f:
        f.write(data)
    return Path(target)


def write_json(target, obj, *, indent: int = 2) -> Path:
    """Write ``obj`` as JSON (strict: no NaN or infinity) atomically.

    The JSON text is produced before the file is created, so an object
    that cannot be serialised leaves nothing behind.
    """
    text = json.dumps(obj, indent=indent, allow_nan=False) + "\n"
    return write_text(target, text)


def jsonable(x):
    """JSON-ready copy of ``x``: dataclasses as dicts, numpy scalars and
    arrays and tuples as Python numbers and lists, non-finite floats as None
    (JSON has no NaN or infinity).

    >>> import numpy as np
    >>> jsonable({"a": np.float64(1.5), "b": [float("nan"), np.int64(2)], "c": (True, "x")})
    {'a': 1.5, 'b': [None, 2], 'c': [True, 'x']}
    """
    import dataclasses
    import math

    import numpy as np

    if dataclasses.is_dataclass(x) and not isinstance(x, type):
        return {f.name: jsonable(getattr(x, f.name)) for f in dataclasses.fields(x)}
    if isinstance(x, dict):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple, np.ndarray)):
        return [jsonable(v) for v in x]
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        return float(x) if math.isfinite(x) else None
    return x
