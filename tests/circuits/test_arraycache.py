"""circuits.arraycache: a cached table reads back the computed arrays to the bit, a damaged
or missing file is computed again, and caching never turns into an error (common practice
for a per-user cache: atomic replace, recompute on any doubt)."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
import numpy.typing as npt
import pytest

from tristock.circuits import edgetable
from tristock.circuits.arraycache import cache_dir, cached_arrays, package_stamp


def counted(calls: list[int]) -> Callable[[], list[npt.NDArray[np.float64]]]:
    def compute() -> list[npt.NDArray[np.float64]]:
        calls.append(1)
        return [np.linspace(0.0, 1.0, 7) ** 3, np.full((2, 3), np.pi)]

    return compute


def test_second_read_is_the_stored_copy_to_the_bit(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("TRISTOCK_CACHE_DIR", str(tmp_path))
    calls: list[int] = []
    first = cached_arrays("t", ("v1",), counted(calls))
    again = cached_arrays("t", ("v1",), counted(calls))
    assert len(calls) == 1
    assert all(
        np.array_equal(a, b) and a.dtype == b.dtype for a, b in zip(first, again, strict=True)
    )
    cached_arrays("t", ("v2",), counted(calls))  # another key: computed again
    assert len(calls) == 2
    assert len(list(tmp_path.glob("t-*.npz"))) == 2
    assert not list(tmp_path.glob("*.tmp"))


def test_damaged_file_is_computed_again(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TRISTOCK_CACHE_DIR", str(tmp_path))
    calls: list[int] = []
    cached_arrays("t", ("k",), counted(calls))
    (stored,) = tmp_path.glob("t-*.npz")
    stored.write_bytes(stored.read_bytes()[:100])
    got = cached_arrays("t", ("k",), counted(calls))
    assert len(calls) == 2 and np.array_equal(got[1], np.full((2, 3), np.pi))
    assert cached_arrays("t", ("k",), counted(calls)) and len(calls) == 2  # rewritten whole


def test_unwritable_or_disabled_cache_only_costs_time(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    blocker = tmp_path / "file"
    blocker.write_text("not a directory")
    monkeypatch.setenv("TRISTOCK_CACHE_DIR", str(blocker / "sub"))
    calls: list[int] = []
    assert len(cached_arrays("t", ("k",), counted(calls))) == 2
    monkeypatch.setenv("TRISTOCK_CACHE_DIR", "")
    assert cache_dir() is None
    cached_arrays("t", ("k",), counted(calls))
    assert len(calls) == 2


def test_default_directory_follows_xdg(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("TRISTOCK_CACHE_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert cache_dir() == tmp_path / "tristock"


def test_transition_coefficients_from_the_cache_equal_the_computed(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("TRISTOCK_CACHE_DIR", str(tmp_path))
    computed = [np.asarray(a) for a in edgetable._filtered_table()]
    edgetable.coefficients.cache_clear()
    try:
        written = edgetable.coefficients()  # computes and stores
        edgetable.coefficients.cache_clear()
        read = edgetable.coefficients()  # reads the file back
    finally:
        edgetable.coefficients.cache_clear()
    assert len(list(tmp_path.glob("transition-*.npz"))) == 1
    for a, b, c in zip(computed, written, read, strict=True):
        assert np.array_equal(a, b) and np.array_equal(a, c)


def test_package_stamp_names_the_installed_build_without_importing_it() -> None:
    """scipy's stamp holds its installed version (importlib.metadata, the packaging
    standard's record), and reading it imports no scipy module."""
    import subprocess
    import sys
    from importlib import metadata

    probe = (
        "import sys; from tristock.circuits.arraycache import package_stamp; "
        "s = package_stamp('scipy'); print(s.decode()); "
        "print(any(m == 'scipy' or m.startswith('scipy.') for m in sys.modules))"
    )
    out = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, check=True
    ).stdout
    assert metadata.version("scipy") in out
    assert out.rstrip().endswith("False")
    assert package_stamp("no_such_package_here") == b""
