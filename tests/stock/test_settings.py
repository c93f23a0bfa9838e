"""``catalog.toml``: optional, two known keys, every problem at file:line with the key, and
reported with the tables' own problems (``load_catalog``, ``tristock catalog check``)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from tristock.cli import main
from tristock.examples import demo_catalog_dir
from tristock.stock.catalog import CatalogError, load_catalog
from tristock.stock.settings import CatalogSettings, parse_settings, read_settings


def test_the_demo_names_its_currency_and_a_catalog_without_the_file_has_none(
    tmp_path: Path,
) -> None:
    demo = read_settings(demo_catalog_dir())
    assert demo.currency == "EUR" and demo.name and "Fennmoor" in demo.name
    assert read_settings(tmp_path) == CatalogSettings()
    assert CatalogSettings().cost_unit == "currency units"


@pytest.mark.parametrize(
    ("text", "where"),
    [
        ('name = "x"\ncurrency = 3\n', "catalog.toml:2: currency: must be a non-empty string"),
        ('currency = "EU R"\n', "catalog.toml:1: currency: 'EU R': 1 to 8 letters"),
        ('\n\ncolour = "red"\n', "catalog.toml:3: colour: unknown key (known: name, currency)"),
        ('name = "x"\ncurrency = \n', "catalog.toml:2: not valid TOML"),
    ],
)
def test_each_problem_names_the_line_and_key(text: str, where: str) -> None:
    with pytest.raises(CatalogError) as caught:
        parse_settings(text)
    assert str(caught.value.errors[0]).startswith(where)


def test_sign_and_code_currencies_are_read() -> None:
    assert parse_settings('currency = "€"').currency == "€"
    assert parse_settings("currency = 'CHF'  # Swiss francs").currency == "CHF"


def test_a_bad_file_fails_the_catalog_with_the_tables_problems_at_once(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    folder = tmp_path / "shop"
    shutil.copytree(demo_catalog_dir(), folder)
    (folder / "catalog.toml").write_text('currency = "EURO DOLLAR"\n', encoding="utf-8")
    with (folder / "pots.csv").open("a", encoding="utf-8") as table:
        table.write("BAD-1,not-a-value,10,100,panel,1.0,5\n")
    with pytest.raises(CatalogError) as caught:
        load_catalog(folder)
    text = [str(e) for e in caught.value.errors]
    assert text[0].startswith("catalog.toml:1: currency:") and any("pots.csv" in t for t in text)
    assert main(["catalog", "check", str(folder)]) == 1
    err = capsys.readouterr().err
    assert "catalog.toml:1: currency:" in err and "pots.csv:" in err
