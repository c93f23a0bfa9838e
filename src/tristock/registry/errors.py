"""What the registry raises: each maps to one exit code of the CLI and one HTTP status."""

from __future__ import annotations


class RegistryError(Exception):
    """Base of the registry's own errors."""


class RegistryUnavailable(RegistryError):
    """The database cannot be reached or opened (CLI exit 1, HTTP 503)."""


class UnknownDesign(RegistryError):
    """No released design (or no such revision) by that name (CLI exit 2, HTTP 404)."""


class RetiredDesign(RegistryError):
    """The design is retired: it takes no new revision (CLI exit 2, HTTP 409)."""


class ReleaseRefused(RegistryError):
    """The design does not meet its spec; ``reasons`` says why (CLI exit 3, HTTP 422)."""

    def __init__(self, name: str, reasons: list[str]) -> None:
        self.name = name
        self.reasons = reasons
        super().__init__(f"{name}: the design does not meet its spec: " + "; ".join(reasons))

    def __reduce__(self) -> tuple[type[ReleaseRefused], tuple[str, list[str]]]:
        return (ReleaseRefused, (self.name, self.reasons))  # pickles to a compute process


class StaleProposal(RegistryError):
    """A proposal made for an older revision than the design's latest (CLI exit 2, HTTP 409)."""
