"""Hand-off files: DESIGN files (``designfile``)."""
