"""The heap padding set at import (``tristock.allocator``): on glibc it is set, a process's own
``MALLOC_TOP_PAD_`` wins. Its speed is a benchmark figure (README, tests/benchmark_recheck.py),
not a test."""

from __future__ import annotations

import ctypes
import os
import sys

import pytest

from tristock.allocator import keep_heap_pad


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
