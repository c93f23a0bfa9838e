"""Service settings from ``TRISTOCK_*`` variables (pydantic-settings): every field settable,
bad values refused in one line naming the variable, the README table in step with the code,
and ``tristock serve`` validating them before it starts anything; importing ``tristock.api.app``
builds no app and configures no logging.
"""

from __future__ import annotations

import logging
import os
import re
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import annotated_types
import pytest
from tristock.api.settings import Settings, SettingsError, env_name, unknown_env_names

from tristock import cli, serve

README = Path(__file__).parents[2] / "api" / "README.md"

#: A value other than the default for every field: (environment text, parsed value).
NON_DEFAULTS: dict[str, tuple[str, Any]] = {
    "catalog_dir": ("/somewhere/else", Path("/somewhere/else")),
    "token": ("s3cret", "s3cret"),
    "allow_open_writes": ("yes", True),
    "db": ("postgresql+psycopg://team@/registry", "postgresql+psycopg://team@/registry"),
    "max_body_bytes": ("65536", 65536),
    "max_top": ("7", 7),
    "default_time_limit_s": ("1.5", 1.5),
    "default_tuned_time_limit_s": ("11", 11.0),
    "max_time_limit_s": ("12", 12.0),
    "max_searches": ("3", 3),
    "search_wait_s": ("0.25", 0.25),
    "max_queue": ("0", 0),
    "compute_nice": ("0", 0),
    "max_samples": ("5000", 5000),
    "max_page": ("50", 50),
    "cache_size": ("0", 0),
    "request_timeout_s": ("2.5", 2.5),
    "keep_alive_s": ("9", 9),
    "shutdown_grace_s": ("4", 4),
    "worker_healthcheck_s": ("120", 120),
}


@pytest.fixture()
def env(monkeypatch: pytest.MonkeyPatch) -> Iterator[pytest.MonkeyPatch]:
    """A clean TRISTOCK_* environment for one test, and the logging set-up restored after it
    (``serve`` configures logging and sets the variables it hands on to its workers)."""
    for name in [k for k in os.environ if k.upper().startswith("TRISTOCK_")]:
        monkeypatch.delenv(name)
    for name in ("TRISTOCK_CATALOG", "TRISTOCK_ALLOW_OPEN_WRITES"):
        monkeypatch.setenv(name, "")  # so that undoing the test unsets what serve sets
        monkeypatch.delenv(name)
    loggers = [logging.getLogger(n) for n in ("tristock", "uvicorn", "uvicorn.access")]
    saved = [(lg, lg.handlers[:], lg.level, lg.propagate) for lg in loggers]
    yield monkeypatch
    for lg, handlers, level, propagate in saved:
        lg.handlers[:] = handlers
        lg.setLevel(level)
        lg.propagate = propagate


def test_every_field_is_set_from_its_variable(env: pytest.MonkeyPatch) -> None:
    assert set(NON_DEFAULTS) == set(Settings.model_fields)
    defaults = Settings.from_env()
    for field, (text, value) in NON_DEFAULTS.items():
        assert getattr(defaults, field) != value, field
        env.setenv(env_name(field), text)
    settings = Settings.from_env()
    for field, (_, value) in NON_DEFAULTS.items():
        assert getattr(settings, field) == value, field
    assert settings.catalog_dir == Path("/somewhere/else")
    assert "s3cret" not in repr(settings)  # the token never shows in logs or tracebacks
    assert Settings.from_env(max_top=2).max_top == 2  # explicit values win over the variables


@pytest.mark.parametrize(
    ("variable", "text", "says"),
    [
        ("TRISTOCK_MAX_SEARCHES", "0", "TRISTOCK_MAX_SEARCHES='0': Input should be greater"),
        ("TRISTOCK_MAX_TOP", "true", "TRISTOCK_MAX_TOP='true': Input should be a valid integer"),
        ("TRISTOCK_SEARCH_WAIT_S", "nan", "TRISTOCK_SEARCH_WAIT_S='nan': Input should be a finite"),
        ("TRISTOCK_REQUEST_TIMEOUT_S", "-1", "TRISTOCK_REQUEST_TIMEOUT_S='-1'"),
        ("TRISTOCK_MAX_TIME_LIMIT_S", "601", "TRISTOCK_MAX_TIME_LIMIT_S='601'"),
        ("TRISTOCK_ALLOW_OPEN_WRITES", "maybe", "TRISTOCK_ALLOW_OPEN_WRITES='maybe'"),
        ("TRISTOCK_DEFAULT_TIME_LIMIT_S", "45", "TRISTOCK_DEFAULT_TIME_LIMIT_S=45 is above"),
        ("TRISTOCK_TOKEN", "   ", "TRISTOCK_TOKEN: an all-blank token is not a token"),
    ],
)
def test_bad_values_are_one_line_naming_the_variable(
    env: pytest.MonkeyPatch, variable: str, text: str, says: str
) -> None:
    env.setenv(variable, text)
    with pytest.raises(SettingsError) as caught:
        Settings.from_env()
    message = str(caught.value)
    assert "\n" not in message
    assert message.startswith(says), message


def test_several_bad_values_are_reported_together(env: pytest.MonkeyPatch) -> None:
    env.setenv("TRISTOCK_MAX_PAGE", "0")
    env.setenv("TRISTOCK_TOKEN", " ")
    env.setenv("TRISTOCK_CACHE_SIZE", "lots")
    with pytest.raises(SettingsError) as caught:
        Settings.from_env()
    message = str(caught.value)
    assert "\n" not in message
    for name in ("TRISTOCK_MAX_PAGE", "TRISTOCK_TOKEN", "TRISTOCK_CACHE_SIZE"):
        assert name in message


def test_empty_variables_mean_unset(env: pytest.MonkeyPatch) -> None:
    env.setenv("TRISTOCK_TOKEN", "")
    env.setenv("TRISTOCK_CATALOG", "")
    settings = Settings.from_env()
    assert settings.token is None
    assert settings.catalog_dir == cli.demo_catalog_dir()


def test_unknown_variables_are_found(env: pytest.MonkeyPatch) -> None:
    env.setenv("TRISTOCK_MAX_SERCHES", "4")
    env.setenv("TRISTOCK_MAX_TOP", "4")
    env.setenv("TRISTOCK_CACHE_DIR", "/tmp/x")  # the library's own (``circuits.arraycache``)
    assert unknown_env_names() == ["TRISTOCK_MAX_SERCHES"]


def _number(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else f"{x:g}"


def _range(field: str) -> str:
    """The range a field accepts, as the README table writes it."""
    bounds: dict[str, str] = {}
    for item in Settings.model_fields[field].metadata:
        for kind in (annotated_types.Ge, annotated_types.Gt, annotated_types.Le):
            if isinstance(item, kind):
                name = kind.__name__.lower()
                bounds[name] = _number(getattr(item, name))
    if "ge" in bounds:
        return f"{bounds['ge']} to {bounds['le']}"
    if "le" in bounds:
        return f"above {bounds['gt']}, at most {bounds['le']}"
    return f"above {bounds['gt']}" if "gt" in bounds else ""


def test_readme_table_lists_every_setting_with_its_default_and_range() -> None:
    row = re.compile(r"^\| `(TRISTOCK_\w+)` \| ([^|]*) \| ([^|]*) \|", re.M)
    rows = {m[1]: (m[2].strip(), m[3].strip()) for m in row.finditer(README.read_text())}
    assert set(rows) == {env_name(f) for f in Settings.model_fields}
    for field, info in Settings.model_fields.items():
        default, accepted = rows[env_name(field)]
        if isinstance(info.default, bool):
            assert default == f"`{str(info.default).lower()}`", field
        elif isinstance(info.default, int | float):
            assert default == f"`{_number(info.default)}`", field
            assert accepted == _range(field), field
        else:
            assert default and accepted, field  # written out in words


def test_serve_refuses_bad_settings_before_starting(
    env: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    def never(*args: Any, **kwargs: Any) -> None:
        raise AssertionError("uvicorn started despite bad settings")

    env.setattr("uvicorn.run", never)
    env.setenv("TRISTOCK_MAX_QUEUE", "-3")
    assert cli.main(["serve"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("tristock serve: TRISTOCK_MAX_QUEUE='-3'") and "\n" not in err
    env.delenv("TRISTOCK_MAX_QUEUE")
    assert cli.main(["serve", "--catalog", "/no/such/folder"]) == 2
    assert "is not a folder" in capsys.readouterr().err


def test_serve_passes_settings_and_logging_to_uvicorn(
    env: pytest.MonkeyPatch, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    seen: dict[str, Any] = {}
    env.setattr("uvicorn.run", lambda app, **kwargs: seen.update(app=app, **kwargs))
    env.setenv("TRISTOCK_KEEP_ALIVE_S", "3")
    env.setenv("TRISTOCK_SHUTDOWN_GRACE_S", "7")
    env.setenv("TRISTOCK_MAX_SERCHES", "4")
    serve.serve(catalog=tmp_path, workers=2, allow_open_writes=True)
    assert seen["app"] == "tristock.api.app:app_from_env" and seen["factory"] is True
    assert seen["http"] == "tristock.api.connections:DeadlineH11Protocol"
    assert (seen["timeout_keep_alive"], seen["timeout_graceful_shutdown"]) == (3, 7)
    assert seen["workers"] == 2
    assert "tristock" in seen["log_config"]["loggers"]
    warning = capsys.readouterr().err  # logged by the handler serve configured
    assert "tristock.serve: ignoring TRISTOCK_MAX_SERCHES: no such setting" in warning
    assert Settings.from_env().catalog_dir == tmp_path.resolve()  # handed on to the workers
    assert Settings.from_env().allow_open_writes is True


def test_importing_the_app_builds_nothing_and_configures_no_logging() -> None:
    code = (
        "import logging, fastapi, tristock.api.app as m;"
        "apps = [k for k, v in vars(m).items() if isinstance(v, fastapi.FastAPI)];"
        "assert apps == [], apps;"
        "assert logging.getLogger().handlers == [];"
        "assert logging.getLogger('tristock').handlers == []"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
