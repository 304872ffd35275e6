"""`logbook export`: the records out as the CSV files `logbook import` reads, and back unchanged."""

from __future__ import annotations

from dataclasses import replace

import pytest

from logbook.cli import main
from logbook.store import Store

TODAY = "2026-12-01"
ORDER = ("models", "machines", "pumps", "events", "readings", "costs")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("export") / "demo.db"
    assert main(["demo", "--no-ui", "--db", str(path), "--today", TODAY]) == 0
    return path


def _records(path):
    with Store(path) as store:
        fleet, book = store.fleet(), store.costs()
    by = lambda *keys: lambda x: tuple(getattr(x, k) or "" for k in keys)  # noqa: E731
    same = dict(id=None, entered_by="", entered_at=None)
    return {
        "models": fleet.models, "machines": fleet.machines, "pumps": fleet.pumps,
        "fitments": sorted((replace(f, id=None) for f in fleet.fitments), key=by("serial", "fitted_on")),
        "readings": sorted((replace(r, **same) for r in fleet.readings), key=by("serial", "taken_on", "machine_hours")),
        "events": sorted((replace(e, **same) for e in fleet.events), key=lambda e: (e.happened_on, e.kind.value,
                                                                                    e.serial or "", e.machine or "")),
        "costs": (book.models, book.sites, book.machines),
    }  # fmt: skip


def test_every_record_comes_back_from_its_export(demo, tmp_path, capsys):
    # Export all, import the files in order into an empty database: the same models, machines, pumps,
    # fitments (the moves and exchanges rebuilt from the events), readings to every digit, events and costs.
    out = tmp_path / "out"
    assert main(["--db", str(demo), "--today", TODAY, "export", "all", "--out", str(out)]) == 0
    fresh = tmp_path / "fresh.db"
    assert main(["--db", str(fresh), "init"]) == 0
    for table in ORDER:
        assert main(["--db", str(fresh), "--today", TODAY, "import", table, str(out / f"{table}.csv")]) == 0, table
    capsys.readouterr()
    want, got = _records(demo), _records(fresh)
    assert len(want["readings"]) > 1000 and len(want["events"]) > 5 and len(want["fitments"]) > len(want["pumps"]) * 0.9
    for key in want:
        assert got[key] == want[key], key
    assert (out / "costs.csv").read_text().splitlines()[1] == "currency,EUR,,,,,"


def test_an_existing_file_is_kept_and_nothing_is_written(demo, tmp_path, capsys):
    target = tmp_path / "readings.csv"
    target.write_text("mine\n")
    assert main(["--db", str(demo), "export", "readings", "--out", str(target)]) == 2
    assert "exists" in capsys.readouterr().err and target.read_text() == "mine\n"
    assert main(["--db", str(demo), "export", "readings", "--out", str(target), "--force"]) == 0
    assert target.read_text().startswith("serial,date,machine")
    assert main(["--db", str(demo), "export", "all"]) == 2  # a folder is needed
    assert "--out" in capsys.readouterr().err


def test_one_pumps_readings_and_text_that_looks_like_a_formula(demo, tmp_path, capsys):
    # A note typed as "=1+1" is written with the leading quote every CSV of the program carries (OWASP CSV
    # injection) and imports back as typed; --serial keeps one pump's readings only.
    db = tmp_path / "d.db"
    db.write_bytes(demo.read_bytes())
    assert main(["--db", str(db), "--today", TODAY, "record", "B-25530", "--date", "2026-11-30", "--hours", "20400",
                 "--servo-pressure", "19.5", "--note", "=1+1", "--confirm"]) == 0
    capsys.readouterr()
    assert main(["--db", str(db), "export", "readings", "--serial", "B-25530"]) == 0
    text = capsys.readouterr().out
    lines = text.splitlines()
    assert all(line.startswith("B-25530,") for line in lines[1:]) and len(lines) > 10
    assert lines[-1].endswith(",'=1+1")
    assert main(["--db", str(db), "export", "pumps", "--serial", "B-25530"]) == 2
    assert "--serial" in capsys.readouterr().err


@pytest.mark.parametrize("args, says", [
    (["readings", "--out", "{tmp}/no/such/x.csv"], "does not exist"),
    (["all", "--out", "{tmp}/a-file"], "is a file"),
    (["readings", "--out", "{tmp}/a-folder", "--force"], "is a folder"),
    (["readings", "--serial", "b-25530"], "did you mean B-25530?"),
])
def test_a_bad_out_or_serial_is_named_and_nothing_is_written(demo, tmp_path, capsys, args, says):
    (tmp_path / "a-file").write_text("mine\n")
    (tmp_path / "a-folder").mkdir()
    before = sorted(p.name for p in tmp_path.rglob("*"))
    assert main(["--db", str(demo), "export", *(a.replace("{tmp}", str(tmp_path)) for a in args)]) == 2
    assert says in capsys.readouterr().err
    assert sorted(p.name for p in tmp_path.rglob("*")) == before and (tmp_path / "a-file").read_text() == "mine\n"


def test_out_dash_is_standard_output(demo, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["--db", str(demo), "export", "models", "--out", "-"]) == 0
    assert capsys.readouterr().out.startswith("model,description,") and not (tmp_path / "-").exists()


def test_the_currency_row_sets_an_empty_logbooks_currency_and_refuses_another(demo, tmp_path, capsys):
    out = tmp_path / "costs.csv"
    assert main(["--db", str(demo), "export", "costs", "--out", str(out)]) == 0
    fresh = tmp_path / "fresh.db"
    for table in ORDER[:-1]:  # the records the costs name
        assert main(["--db", str(demo), "export", table, "--out", str(tmp_path / f"{table}.csv")]) == 0
    assert main(["--db", str(fresh), "init"]) == 0
    for table in ORDER[:-1]:
        assert main(["--db", str(fresh), "--today", TODAY, "import", table, str(tmp_path / f"{table}.csv")]) == 0
    assert main(["--db", str(fresh), "import", "costs", str(out)]) == 0
    with Store(fresh) as store:
        assert store.costs().currency == "EUR"
    assert main(["--db", str(fresh), "import", "costs", str(out)]) == 0  # again: already there
    assert "already present" in capsys.readouterr().out
    other = tmp_path / "usd.csv"
    other.write_text(out.read_text().replace("currency,EUR", "currency,USD"))
    assert main(["--db", str(fresh), "import", "costs", str(other)]) == 2
    assert "exchange rates" in capsys.readouterr().err
    with Store(fresh) as store:
        assert store.costs().currency == "EUR"
