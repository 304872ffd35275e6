"""The import's second look and plausibility without the full crossing forecast and without
reading the store again: the fitted lines alone give the same bands (and lines) as the
forecast's, the rows the store hands back are the rows it reads back, and the command reports
what the whole-forecast, read-again path reported."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from logbook.analysis.fleet import forecast_fleet
from logbook.cli import main
from logbook.commands.importing import _after, _file_lines
from logbook.imports import import_bytes
from logbook.model import ALL_KINDS
from logbook.plausible import fleet_doubts, forecast_bands
from logbook.rounds import import_second_look, new_readings, reading_fits, second_look
from logbook.store import Store
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)
from tests.store.test_import_feedback import DAY, _new_readings

HEAD = "serial,date,machine,machine_hours,case_drain,servo_pressure,neutral_drift,oil_temp,test_pressure,test_speed\n"


def _csv(readings) -> bytes:
    def v(x):
        return "" if x is None else f"{x}"

    return (HEAD + "".join(
        f"{r.serial},{r.taken_on},{r.machine},{r.machine_hours:.1f},{v(r.case_drain_lpm and round(r.case_drain_lpm, 3))},"
        f"{v(r.servo_pressure_bar and round(r.servo_pressure_bar, 3))},{v(r.neutral_drift_bar)},{v(r.oil_temp_c)},"
        f"{v(r.test_pressure_bar)},{v(r.test_speed_rpm)}\n" for r in readings)).encode()


def test_the_fitted_lines_alone_are_the_forecasts_lines_and_give_the_same_second_look(demo):
    with Store(demo) as store:
        before = store.fleet()
    forecast = forecast_fleet(before, DAY)
    packed, details = reading_fits(before, DAY)
    assert len(details) == len(ALL_KINDS) * len(packed.serials) == len(ALL_KINDS) * len(forecast.pumps)
    compared = 0
    for i, serial in enumerate(packed.serials):
        pf = forecast.pump(serial)
        for k, kind in enumerate(ALL_KINDS):
            kf = next(kf for kf in pf.kinds if kf.kind is kind)
            mine = details[len(ALL_KINDS) * i + k]
            assert (mine is None) == (kf.fit is None), (serial, kind)
            if mine is None:
                continue
            assert mine == kf.fit  # points, path, parameters, covariance, sigma, dof
            x = np.array([0.0, 500.0, 5_000.0])
            for lo, hi in zip(mine.bounds(x, 0.95, reading=True), kf.fit.bounds(x, 0.95, reading=True)):
                assert np.array_equal(lo, hi)
            compared += 1
        # the TUI's band question reads the same FitDetail.band(reading=True)
        assert forecast_bands(replace(pf, kinds=tuple(
            replace(kf, fit=details[len(ALL_KINDS) * i + ALL_KINDS.index(kf.kind)]) for kf in pf.kinds)), DAY, DAY) \
            == forecast_bands(pf, DAY, DAY)
    assert compared > 10
    new = _new_readings(before, 40)
    lines = second_look(before, forecast, new)
    assert lines and import_second_look(before, before, DAY, added=new) == lines


def test_the_rows_an_import_hands_back_are_the_rows_the_store_reads_back(demo):
    with Store(demo) as store:
        before = store.fleet()
        new = _new_readings(before, 30, seed=7)
        written: list = []
        report = import_bytes(store, "readings", _csv(new), name="round.csv", today=DAY, written=written)
        assert report.added == len(new) and not report.problems
        after, added = _after(before, written)
        again = store.fleet()
    # the same readings, not in the store's order (nothing the command does with them depends on it)
    assert sorted(after.readings, key=lambda r: r.id) == sorted(again.readings, key=lambda r: r.id)
    assert after.change_count == again.change_count
    assert sorted(added.id.tolist()) == sorted(r.id for r in new_readings(before, again))
    assert import_second_look(before, after, DAY, added=added) == import_second_look(before, again, DAY)
    assert fleet_doubts(after, added) == fleet_doubts(again, new_readings(before, again))
    backwards = replace(after, readings=after.readings.take(np.arange(len(after.readings))[::-1]))
    assert fleet_doubts(backwards, added) == fleet_doubts(again, new_readings(before, again))


def test_a_write_by_someone_else_between_the_reads_makes_the_import_read_the_store_again(demo):
    with Store(demo) as store:
        before = store.fleet()
        with Store(demo) as other:  # another writer, after our snapshot and before our import
            import_bytes(other, "readings", _csv(_new_readings(before, 2, seed=8)[:1]), name="one.csv", today=DAY)
        written: list = []
        import_bytes(store, "readings", _csv(_new_readings(before, 30, seed=7)[3:]), name="round.csv", today=DAY,
                     written=written)
        assert len(written) == 1  # handed back, but not a continuation of our snapshot
        assert _after(before, written) is None


def test_the_command_reports_what_the_whole_forecast_read_again_path_reports(demo, tmp_path, capsys):
    with Store(demo) as store:
        before = store.fleet()
    new = _new_readings(before, 119, seed=5)
    path = tmp_path / "round.csv"
    path.write_bytes(_csv(new))
    assert main(["--db", str(demo), "--today", TODAY, "import", "readings", str(path)]) == 0
    capsys.readouterr()
    listed = (tmp_path / "round.csv.second-look.txt").read_text().splitlines()
    with Store(demo) as store:
        after = store.fleet()
    looks = second_look(before, forecast_fleet(before, DAY), new_readings(before, after))
    doubts = fleet_doubts(after, new_readings(before, after), None, looks, _file_lines(path.read_bytes(), DAY))
    assert looks and doubts
    assert [line.strip() for line in listed if line.strip()] == [f"second look: {line}" for line in [*looks, *doubts]]
