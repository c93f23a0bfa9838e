"""tristock's HTTP service: a thin FastAPI layer over the ``tristock`` library.

The routers only translate requests into library calls (``tristock.designs.design``,
``tristock.report.board``, ``tristock.designs.reoptimise``, ``tristock.stock.catalog``) and
answer with the same models and dicts as the CLI's ``--json``. Build an app with
:func:`tristock.api.app.create_app`.
"""
