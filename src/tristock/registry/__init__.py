"""The registry of released designs and the impact of stock changes on their planned builds.

- :mod:`~tristock.registry.store`: revisions of released designs (SQLAlchemy Core over
  SQLite or PostgreSQL, Alembic migrations in ``migrations/``), never overwritten;
- :mod:`~tristock.registry.release`: a DESIGN file checked against its spec, with the full
  model's snapshot;
- :mod:`~tristock.registry.impact`: over-subscribed stock codes, the designs they affect and
  the joint fewest-changes proposal.
"""

from tristock.registry.errors import (
    RegistryError,
    RegistryUnavailable,
    ReleaseRefused,
    RetiredDesign,
    StaleProposal,
    UnknownDesign,
)
from tristock.registry.store import Registry, check_name, parse_ref

__all__ = [
    "Registry",
    "RegistryError",
    "RegistryUnavailable",
    "ReleaseRefused",
    "RetiredDesign",
    "StaleProposal",
    "UnknownDesign",
    "check_name",
    "parse_ref",
]
