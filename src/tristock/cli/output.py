"""Writing results: whole texts at once, strict JSON, and a reader that went away.

A result is written in one piece when the work is done, so an interrupted run prints nothing
of it. When the reader closes the pipe early (``tristock design --example | head -3``) the
rest is dropped quietly and the command keeps its own exit code.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import sys
from typing import IO, Any

from tristock.cli.exits import WorkFailed


def _finite(value: Any) -> Any:
    """``value`` with every non-finite float replaced by None (JSON has no NaN or infinity)."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_finite(v) for v in value]
    return value


def json_text(data: Any) -> str:
    """Indented UTF-8 JSON that strict parsers accept: NaN and ±inf are written as null, as
    the HTTP API does."""
    try:
        return json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False)
    except ValueError:
        return json.dumps(_finite(data), indent=2, ensure_ascii=False, allow_nan=False)


def _stop_writing(stream: IO[str]) -> None:
    """Point the stream's descriptor at the null device, so the interpreter's final flush of
    what is still buffered cannot fail again."""
    with contextlib.suppress(OSError, ValueError, AttributeError):  # no descriptor: nothing to do
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, stream.fileno())
        os.close(null)


def write_quietly(text: str, stream: IO[str]) -> None:
    """Write ``text`` and flush; a reader that has gone (a broken pipe) ends it quietly.

    Any other failure to write (a full disk behind ``> file``) raises WorkFailed: the result
    was asked for and is not there."""
    try:
        stream.write(text)
        stream.flush()
    except BrokenPipeError:
        _stop_writing(stream)
    except (OSError, ValueError) as err:
        _stop_writing(stream)
        reason = err.strerror if isinstance(err, OSError) and err.strerror else str(err)
        raise WorkFailed(f"tristock: cannot write the result: {reason}") from None


def emit(text: str) -> None:
    """Write one whole result (a line break added) to stdout."""
    write_quietly(text + "\n", sys.stdout)


def emit_json(data: Any) -> None:
    """Write one JSON object to stdout."""
    emit(json_text(data))


def complain(line: str) -> None:
    """One line on stderr; if even stderr is gone, there is no one left to tell."""
    with contextlib.suppress(WorkFailed):
        write_quietly(line.rstrip("\n") + "\n", sys.stderr)
