"""The jobs: fixed designs (``fixed``), trimmed (``trimmed``), tuned (``tuned``) and
re-optimisation (``reoptimise``), reported through ``candidate`` and ``results``."""
