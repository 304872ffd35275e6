"""The distribution's own name, the licence and the notice of the copied viscosity-index
table, and a README true about limits."""

from __future__ import annotations

import tomllib
from importlib import metadata
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_the_distribution_has_a_name_of_its_own_and_keeps_the_logbook_command():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    assert project["name"] == "pump-logbook"  # "logbook" on the package index is a logging library
    assert project["scripts"]["logbook"] == "logbook.cli:main"
    assert project["license"] == {"text": "MIT"}


def test_license_and_the_notice_of_the_copied_table():
    assert (ROOT / "LICENSE").read_text().startswith("MIT License")
    notice = (ROOT / "THIRD_PARTY_NOTICES.md").read_text()
    oil = (ROOT / "logbook" / "oil.py").read_text()
    assert "`chemicals` package" in oil and "MIT" in oil  # the copy says where it came from
    # the notice carries the chemicals package's own licence text, as its distribution ships it
    shipped = next(f for f in metadata.distribution("chemicals").files if f.name.startswith("LICENSE"))
    licence = Path(metadata.distribution("chemicals").locate_file(shipped)).read_text().strip()
    assert licence.splitlines()[0] == "MIT License"
    assert all(line in notice for line in licence.splitlines() if line.strip())


def test_the_readme_does_not_claim_default_limits(tmp_path):
    from datetime import date

    from logbook.imports import import_bytes
    from logbook.store import Store

    readme = (ROOT / "README.md").read_text()
    assert "Limits shipped as defaults" not in readme and "ships no default limits" in readme
    with Store(tmp_path / "t.db", user="t") as store:  # a model given without limits has none
        report = import_bytes(store, "models", b"model,displacement,rated_pressure,max_speed,test_speed\nNL-1,90,400,2200,2000\n",
                              name="models.csv", today=date(2026, 1, 1))
        assert report.problems == []
        assert store.models()["NL-1"].limits == ()
        assert any("NL-1" in f.message for f in store.check())  # and the check says so
