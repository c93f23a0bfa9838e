"""Reports of one board (``board``: analysis and simulation as JSON) and plots (``plot``)."""
