"""The exact search over a search model: eligible parts and scores (``model``), bounds
(``bounds``), rows by the full model (``rows``), the guarantee's probes (``guarantee``), the
loop linearised at the target (``targetpoint``), two engines (``enumeration``, ``cpsat``) and
plain-words reasons (``explain``). The jobs that use it live in ``tristock.designs``."""
