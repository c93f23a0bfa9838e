"""Arrays worth computing once per machine, kept in the user's cache directory.

A table that takes a noticeable share of a command's time to compute (the comparator
transition's solutions, ``transition``) is stored after its first computation as an
uncompressed ``.npz`` named by what it is and a digest of everything it depends on (the
source of the module that computes it, the numpy and scipy builds: ``package_stamp``), and
read back by later processes: the same arrays to the bit, about a hundred times faster.

The directory is ``$TRISTOCK_CACHE_DIR`` if set (set and empty: no caching), else
``$XDG_CACHE_HOME/tristock`` (default ``~/.cache/tristock``). A missing, unreadable or
damaged file is computed again and rewritten (atomically: a temporary file renamed over it);
a directory that cannot be written only costs the time, never an error.
"""

from __future__ import annotations

import hashlib
import importlib.util
import os
import tempfile
import zipfile
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]


def cache_dir() -> Path | None:
    """Where cached arrays live (module docstring), or None when caching is turned off."""
    chosen = os.environ.get("TRISTOCK_CACHE_DIR")
    if chosen is not None:
        return Path(chosen) if chosen else None
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "tristock"


def digest(parts: Sequence[bytes | str]) -> str:
    """A short hex digest of ``parts`` (SHA-256, 16 hex digits), each part length-prefixed."""
    h = hashlib.sha256()
    for part in parts:
        data = part.encode() if isinstance(part, str) else part
        h.update(len(data).to_bytes(8, "little") + data)
    return h.hexdigest()[:16]


def package_stamp(name: str) -> bytes:
    """What identifies the installed build of package ``name`` in a cache key, found without
    importing it: its ``version.py`` (numpy's and scipy's hold the version and the source
    revision), else the version in its metadata (parsing that costs about 40 ms of a
    command's start, reading the file about 1 ms); b"" when it is not installed."""
    found = importlib.util.find_spec(name)
    if found is None or found.origin is None:
        return b""
    try:
        return (Path(found.origin).parent / "version.py").read_bytes()
    except OSError:
        from importlib import metadata

        return metadata.version(name).encode()


def cached_arrays(
    name: str, key: Sequence[bytes | str], compute: Callable[[], Sequence[FloatArray]]
) -> tuple[FloatArray, ...]:
    """``compute()``'s float arrays, read from ``<cache dir>/<name>-<digest(key)>.npz`` when a
    whole copy is there, else computed and stored (module docstring)."""
    directory = cache_dir()
    if directory is None:
        return tuple(compute())
    path = directory / f"{name}-{digest(key)}.npz"
    found = _read(path)
    if found is not None:
        return found
    arrays = tuple(np.asarray(a, dtype=np.float64) for a in compute())
    _write(path, arrays)
    return arrays


def _read(path: Path) -> tuple[FloatArray, ...] | None:
    try:
        with np.load(path, allow_pickle=False) as stored:
            count = int(stored["count"])
            arrays = tuple(np.asarray(stored[f"a{n}"]) for n in range(count))
    except (OSError, ValueError, KeyError, EOFError, zipfile.BadZipFile):
        return None
    if not all(a.dtype == np.float64 for a in arrays):
        return None
    return arrays


def _write(path: Path, arrays: tuple[FloatArray, ...]) -> None:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=path.stem, suffix=".tmp")
        try:
            with os.fdopen(fd, "wb") as out:
                named = {f"a{n}": a for n, a in enumerate(arrays)}
                np.savez(out, count=np.array(len(arrays)), **named)  # type: ignore[arg-type]
            os.replace(tmp, path)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
    except OSError:
        return
