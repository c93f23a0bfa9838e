"""Alembic migrations of the registry (``script_location`` ``tristock.registry:migrations``)."""
