"""Tolerance analysis of one board: the spread box (``spread``), its extremes (``worstcase``,
``boxnewton``), Monte Carlo yield, sensitivities, drift and the ``analyse`` bundle."""
