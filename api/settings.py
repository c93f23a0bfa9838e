"""Service settings: where the catalog is, who may write stock, the request limits and the
connection timeouts.

Every field can be set from the environment as ``TRISTOCK_<NAME>``; :meth:`Settings.from_env`
turns bad values into one line naming each variable. ``tristock serve`` validates them once
before starting any worker. The table in ``api/README.md`` lists each with its default and
range (a test keeps the two in step).
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Any, Final

from pydantic import Field, ValidationError, field_validator, model_validator
from pydantic.fields import FieldInfo
from pydantic_settings import BaseSettings, PydanticBaseSettingsSource, SettingsConfigDict

#: Hard ceilings that appear in the OpenAPI schema; settings may only lower them.
MAX_TOP: Final[int] = 50
MAX_POINTS: Final[int] = 20_000
MAX_PERIODS: Final[int] = 200
MAX_SAMPLES: Final[int] = 100_000
MAX_PAGE: Final[int] = 500
MAX_STOCK: Final[int] = 1_000_000_000
#: The largest search time limit an operator may allow (seconds). Requests may ask for more:
#: they are cut to ``max_time_limit_s`` (the answer's ``search.time_limit_s`` says so).
MAX_TIME_LIMIT_S: Final[float] = 600.0

ENV_PREFIX: Final[str] = "TRISTOCK_"
CATALOG_ENV: Final[str] = "TRISTOCK_CATALOG"
#: Variables the library itself reads (not server settings): the per-machine array cache,
#: the registry's Dask scheduler and its writer's name.
LIBRARY_ENV: Final[frozenset[str]] = frozenset(
    {"TRISTOCK_CACHE_DIR", "TRISTOCK_SCHEDULER", "TRISTOCK_USER"}
)


class SettingsError(ValueError):
    """Bad settings: one line naming each variable and what is wrong with it."""


def default_catalog_dir() -> Path:
    """The bundled demo stock room (same folder the CLI's ``--example`` uses)."""
    from tristock.cli import demo_catalog_dir

    found: Path = demo_catalog_dir()
    return found


class _CatalogVariable(PydanticBaseSettingsSource):
    """``TRISTOCK_CATALOG`` sets ``catalog_dir`` (the variable named like ``--catalog``)."""

    def get_field_value(self, field: FieldInfo, field_name: str) -> tuple[Any, str, bool]:
        return None, field_name, False

    def __call__(self) -> dict[str, Any]:
        value = os.environ.get(CATALOG_ENV)
        return {} if value is None else {"catalog_dir": value}


class Settings(BaseSettings):
    """Everything the app and the server need at start-up (each field is described in the
    README table; ``TRISTOCK_<NAME>`` sets it).

    ``token``: when set, stock writes need ``Authorization: Bearer <token>``; when unset,
    writes are refused unless ``allow_open_writes``. ``max_searches`` compute requests
    (design, reoptimise, analyse, simulate) run at once per worker, in processes of their
    own; a request that finds every slot busy waits up to ``search_wait_s`` s, then gets 503,
    and when ``max_queue`` requests are waiting already it gets 503 at once.
    ``request_timeout_s``: a connection must deliver a complete request (headers and body)
    within this many seconds of opening or of its previous answer, else it is closed.
    """

    model_config = SettingsConfigDict(
        env_prefix=ENV_PREFIX,
        frozen=True,
        extra="forbid",
        allow_inf_nan=False,
        validate_default=True,
    )

    catalog_dir: Path = Field(
        default_factory=default_catalog_dir,
        description="catalog folder (default: the bundled demo)",
    )
    token: str | None = Field(
        None, repr=False, description="bearer token for stock writes (unset: no token)"
    )
    allow_open_writes: bool = Field(False, description="stock writes without a token")
    db: str | None = Field(
        None,
        repr=False,
        description="registry database URL or file (default: registry.sqlite beside the catalog)",
    )
    max_body_bytes: int = Field(256 * 1024, ge=1024, le=16 * 1024 * 1024, description="413 above")
    max_top: int = Field(MAX_TOP, ge=1, le=MAX_TOP, description="designs per request")
    default_time_limit_s: float = Field(5.0, gt=0, description="search time without one asked")
    default_tuned_time_limit_s: float = Field(
        30.0, gt=0, description="the same for a tuned spec, cut to max_time_limit_s"
    )
    max_time_limit_s: float = Field(
        30.0, gt=0, le=MAX_TIME_LIMIT_S, description="a larger time_limit_s is cut to this"
    )
    max_searches: int = Field(2, ge=1, le=64, description="compute requests at once per worker")
    search_wait_s: float = Field(2.0, ge=0, le=600, description="wait for a slot, then 503")
    max_queue: int = Field(16, ge=0, le=10_000, description="waiting beyond this: 503 at once")
    compute_nice: int = Field(10, ge=0, le=19, description="compute processes' CPU niceness")
    max_samples: int = Field(MAX_SAMPLES, ge=1, le=MAX_SAMPLES, description="Monte Carlo cap")
    max_page: int = Field(MAX_PAGE, ge=1, le=MAX_PAGE, description="catalog items per page")
    cache_size: int = Field(256, ge=0, le=100_000, description="answers kept per worker; 0 off")
    request_timeout_s: float = Field(
        10.0, gt=0, le=3600, description="a complete request must arrive within this"
    )
    keep_alive_s: int = Field(5, ge=1, le=3600, description="idle keep-alive connections close")
    shutdown_grace_s: int = Field(30, ge=1, le=3600, description="in-flight work on shutdown")
    worker_healthcheck_s: int = Field(
        60, ge=1, le=3600, description="a worker silent this long is restarted"
    )

    @classmethod
    def settings_customise_sources(
        cls,
        settings_cls: type[BaseSettings],
        init_settings: PydanticBaseSettingsSource,
        env_settings: PydanticBaseSettingsSource,
        dotenv_settings: PydanticBaseSettingsSource,
        file_secret_settings: PydanticBaseSettingsSource,
    ) -> tuple[PydanticBaseSettingsSource, ...]:
        """Values given in code, then ``TRISTOCK_CATALOG``, then the other variables."""
        return init_settings, _CatalogVariable(settings_cls), env_settings

    @field_validator("catalog_dir", mode="before")
    @classmethod
    def _blank_catalog_is_default(cls, value: Any) -> Any:
        return default_catalog_dir() if value == "" else value

    @field_validator("token", mode="before")
    @classmethod
    def _blank_token_is_unset(cls, value: Any) -> Any:
        if value == "":
            return None  # TRISTOCK_TOKEN= (empty) means no token
        if isinstance(value, str) and not value.strip():
            raise ValueError("an all-blank token is not a token (leave it unset)")
        return value

    @model_validator(mode="after")
    def _default_within_cap(self) -> Settings:
        if self.default_time_limit_s > self.max_time_limit_s:
            raise ValueError(
                f"{env_name('default_time_limit_s')}={self.default_time_limit_s:g} is above "
                f"{env_name('max_time_limit_s')}={self.max_time_limit_s:g}"
            )
        return self

    @classmethod
    def from_env(cls, **overrides: Any) -> Settings:
        """Settings from ``TRISTOCK_*`` variables (``overrides`` win); SettingsError with one
        line naming each bad variable."""
        try:
            return cls(**overrides)
        except ValidationError as err:
            raise SettingsError("; ".join(_describe(e) for e in err.errors())) from None


def env_name(field: str) -> str:
    """The environment variable that sets ``field``."""
    return CATALOG_ENV if field == "catalog_dir" else ENV_PREFIX + field.upper()


def unknown_env_names(environ: dict[str, str] | None = None) -> list[str]:
    """``TRISTOCK_*`` variables that set no field (likely misspelt), sorted."""
    env = os.environ if environ is None else environ
    known = {env_name(f) for f in Settings.model_fields} | {ENV_PREFIX + "CATALOG_DIR"}
    known |= LIBRARY_ENV
    return sorted(k for k in env if k.upper().startswith(ENV_PREFIX) and k.upper() not in known)


def _describe(error: Any) -> str:
    loc = error.get("loc") or ()
    msg = str(error.get("msg", "invalid")).removeprefix("Value error, ")
    if not loc:
        return msg
    field = str(loc[0])
    name = env_name(field) if field in Settings.model_fields else field
    shown = error.get("input")
    if field == "token" or isinstance(shown, dict) or shown is None:
        return f"{name}: {msg}"
    if isinstance(shown, float) and not math.isfinite(shown):
        shown = str(shown)
    return f"{name}={shown!r}: {msg}"
