"""Part tables: their columns and CSV dialect, validation, catalogs, and safe stock writes.

``tristock.stock.catalog`` re-exports the public names; import from there.
"""
