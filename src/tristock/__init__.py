"""tristock: choose stock-room parts for an op-amp triangle/square oscillator.

The library is organised one idea per module:

- ``units``: parse and format component values (SI prefixes, IEC 60062 codes).
- ``eseries``: IEC 60063 preferred-number series E6 to E192.
- ``parts``: what a resistor, capacitor, op amp or potentiometer row is.
- ``catalog``: load, validate and update the CSV part tables of a stock room.
- ``spec``: the engineer's targets (pydantic models shared by CLI and API).
- ``circuit``: the oscillator's physics with non-ideal op amps.
- ``analysis``: worst case, Monte Carlo yield, sensitivities, drift.
- ``simulate``: time-domain verification of the two-op-amp loop.
- ``search``: exact enumeration and CP-SAT search, ranking.
- ``cli``: the ``tristock`` command.
"""

__version__ = "0.1.0"
