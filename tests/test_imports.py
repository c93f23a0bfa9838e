"""Every module of ``tristock`` and ``tristock.api`` imports where ``fcntl`` does not exist (as on
Windows), and a stock write still takes a lock there (filelock's fallback)."""

from __future__ import annotations

import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

from tristock.stock.catalog import load_catalog

SMALL = Path(__file__).resolve().parent / "fixtures" / "small_catalog"

WITHOUT_FCNTL = textwrap.dedent(
    """
    import sys
    sys.modules["fcntl"] = None  # "import fcntl" now raises ImportError
    import importlib, pkgutil, warnings
    import tristock, tristock.api

    # tristock.api is listed on its own: an editable install maps it from the checkout's api/
    # folder, outside tristock.__path__.
    names = []
    for package in (tristock, tristock.api):
        names.append(package.__name__)
        for info in pkgutil.walk_packages(package.__path__, package.__name__ + "."):
            if not info.name.endswith(".__main__"):  # those run the command
                names.append(info.name)
    names = list(dict.fromkeys(names))
    assert "tristock.api.routers.design" in names, names
    for name in names:
        importlib.import_module(name)
    assert "fcntl" not in sys.modules or sys.modules["fcntl"] is None

    from tristock.stock.catalog import adjust_stock
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # filelock notes that only a soft lock is available
        assert adjust_stock(sys.argv[1], "TR-2K20", 1) == 4001
    print(len(names))
    """
)


def test_every_module_imports_without_fcntl(tmp_path: Path) -> None:
    catalog = tmp_path / "small"
    shutil.copytree(SMALL, catalog)
    proc = subprocess.run(
        [sys.executable, "-c", WITHOUT_FCNTL, str(catalog)],
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert proc.returncode == 0, proc.stderr
    assert int(proc.stdout) >= 40  # the packages and their modules, all imported
    assert load_catalog(catalog).get("TR-2K20").stock == 4001
