"""The process-wide settings made at import (``tristock.runtime``): on glibc the heap padding is
set, a process's own ``MALLOC_TOP_PAD_`` wins; OpenBLAS runs one thread unless the environment
says otherwise. Their speed is a benchmark figure (README, tests/benchmark_recheck.py), not a
test."""

from __future__ import annotations

import ctypes
import os
import subprocess
import sys

import pytest

from tristock.runtime import keep_heap_pad, one_blas_thread

#: Imports tristock first (as the CLI does), runs the worst-case search's batched eigh and
#: prints the process's thread count and the variable.
THREADS_AFTER_EIGH = """
import os, tristock, numpy as np
np.linalg.eigh(np.tile(np.eye(16), (400, 1, 1)) + 0.1)
print(len(os.listdir("/proc/self/task")), os.environ.get("OPENBLAS_NUM_THREADS"))
"""


def glibc() -> bool:
    try:
        return hasattr(ctypes.CDLL(None), "gnu_get_libc_version")
    except OSError:
        return False


def test_the_heap_pad_is_set_on_glibc(monkeypatch: pytest.MonkeyPatch) -> None:
    if not (sys.platform.startswith("linux") and glibc()) and not os.environ.get("CI"):
        pytest.skip("glibc only (CI runs on glibc, where this must hold)")
    monkeypatch.delenv("MALLOC_TOP_PAD_", raising=False)
    assert keep_heap_pad()


def test_a_process_setting_of_its_own_is_kept(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("MALLOC_TOP_PAD_", "0")
    assert not keep_heap_pad()
    monkeypatch.setenv("OPENBLAS_NUM_THREADS", "2")
    assert not one_blas_thread()
    assert os.environ["OPENBLAS_NUM_THREADS"] == "2"


def test_nothing_is_set_once_numpy_is_loaded(monkeypatch: pytest.MonkeyPatch) -> None:
    import numpy  # noqa: F401  (loaded, as in a program that imports it before tristock)

    monkeypatch.delenv("OPENBLAS_NUM_THREADS", raising=False)
    assert not one_blas_thread()
    assert "OPENBLAS_NUM_THREADS" not in os.environ


def test_a_fresh_process_runs_the_linear_algebra_on_one_thread() -> None:
    if not sys.platform.startswith("linux") and not os.environ.get("CI"):
        pytest.skip("counts threads in /proc (Linux; CI runs on Linux)")
    env = {k: v for k, v in os.environ.items() if k != "OPENBLAS_NUM_THREADS"}
    out = subprocess.run(
        [sys.executable, "-c", THREADS_AFTER_EIGH],
        env=env,
        capture_output=True,
        text=True,
        check=True,
    ).stdout.split()
    assert out == ["1", "1"]
