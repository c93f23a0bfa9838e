"""tristock: choose stock-room parts for an op-amp triangle/square oscillator.

The library is organised one idea per module:

- ``units``, ``eseries``: component values (SI prefixes, IEC 60062 codes) and IEC 60063 series.
- ``parts``, ``catalog``, ``tablegen``: part rows, the CSV part tables (``catalog`` gathers
  the ``stock`` package: columns, CSV dialect, rows, tables, safe stock writes, write
  journal, lock), table generation; ``atomicio``: the one atomic file writer.
- ``spec``: the engineer's targets (pydantic models shared by CLI and API); ``limits``: the
  ranges of a run's settings; ``examples``: the bundled specs and demo catalog.
- ``circuit``, ``integrator``, ``transition``, ``checks``: the oscillator's physics with
  non-ideal op amps (``integrator`` and ``transition``: each channel's finite gain-bandwidth,
  the comparator's switching edge), and design checks.
- ``design``, ``designfile``: the parts of one board, and DESIGN files.
- ``spread``, ``worstcase``, ``boxnewton``: the spread box of one design (tolerances, rails,
  temperature, op-amp spread) and its extremes (corners, balanced rails, projected Newton).
- ``analysis``, ``simulate``, ``plot``, ``report``: worst case, yield, sensitivities, drift;
  time-domain verification (``simulate`` is a package: exact piecewise events, or an ODE
  between events when the op amps' gain-bandwidth is finite); plots; JSON reports.
- ``search`` (fixed designs), ``trim``, ``tuning``, ``reoptimise``: the exact searches.
- ``results``: result models shared by ``--json`` and the HTTP API.
- ``cli`` (a package, one module per command group), ``serve``: the ``tristock`` command
  and the HTTP server entry.
"""

__version__ = "0.1.0"
