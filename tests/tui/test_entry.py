"""Reading and event entry: live checks with the store's messages, nothing written on
bad input, and a saved record updating the forecast without a restart."""

from __future__ import annotations

from textual.widgets import Static

from logbook.analysis.results import Outcome
from logbook.model import Kind
from logbook.tui.screens.event import EventScreen
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.reading import ReadingScreen
from tests.tui.conftest import TODAY, press_on_fleet, settle


def crossing_pump(app):
    """A pump whose case drain is forecast to cross its limit (the engine's say)."""
    return next(
        p for p in app.forecast.pumps
        if p.worst is not None and p.worst.kind is Kind.CASE_DRAIN and p.worst.outcome is Outcome.CROSSING
    )


def meter_now(app, machine: str) -> float:
    """A little above the latest hour-meter record of ``machine`` (its current meter: an
    older meter may have read more before it was replaced)."""
    records = [(r.taken_on, r.machine_hours) for r in app.fleet.readings if r.machine == machine]
    records += [(e.happened_on, e.hours) for e in app.fleet.events if e.machine == machine and e.hours is not None]
    return max(records)[1] + 12.0


def text(widget) -> str:
    return str(widget.render())


async def open_form(app, pilot, serial: str, key: str):
    app.screen.query_one("#find").value = serial
    await pilot.pause()
    app.screen.query_one("#fleet-table").focus()
    await pilot.press(key)
    await settle(app, pilot)
    return app.screen


def fill(form, **values: str) -> None:
    for name, value in values.items():
        form.fields[name].input.value = value  # as typed: checked like a keystroke


async def test_a_valid_reading_is_saved_compared_and_changes_the_forecast(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        model = app.fleet.models[pf.model]
        limit = model.limit(Kind.CASE_DRAIN).value
        before_count = demo_store.counts()["readings"]
        form = await open_form(app, pilot, pf.serial, "r")
        assert isinstance(form, ReadingScreen) and form.serial == pf.serial
        assert form.fields["date"].text == TODAY.isoformat()
        assert form.fields["test_speed"].text  # prefilled from the last test or the model
        # At the model's reference conditions the normalized value equals the reading
        # (Q_ref = Q_meas * dp_ref/dp_meas * nu_meas/nu_ref: laminar leakage, Rabie, Fluid Power Engineering, 2009, eq. 2.19).
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", case_drain=f"{limit * 0.8:.2f}",
             oil_temp=f"{model.ref_temp_c:g}", test_pressure=f"{model.ref_pressure_bar:g}",
             test_speed=f"{model.test_speed_rpm:g}", oil_grade=str(model.oil_grade), oil_vi=f"{model.oil_vi:g}")
        await settle(app, pilot)
        check = text(form.query_one("#check"))
        assert "accepts" in check  # the store's dry run found nothing wrong
        assert "Case drain" in check and "trend expects" in check  # but a worn-looking value is asked about
        await pilot.press("f2")
        await settle(app, pilot)
        assert demo_store.counts()["readings"] == before_count  # asked, not saved yet
        await pilot.press("f2")  # saved as typed
        await settle(app, pilot)
        assert demo_store.counts()["readings"] == before_count + 1, text(form.query_one("#check"))
        saved = [r for r in demo_store.readings(pf.serial) if r.taken_on == TODAY]
        assert len(saved) == 1 and abs(saved[0].case_drain_lpm - round(limit * 0.8, 2)) < 1e-9
        old = pf.worst
        after = next(k for k in app.pump_forecast(pf.serial).kinds if k.kind is Kind.CASE_DRAIN)
        assert after.n_readings == old.n_readings + 1 and after.latest_on == TODAY
        assert abs(after.latest_value - round(limit * 0.8, 2)) < 1e-6
        assert after.p10_date != old.p10_date  # a worn-looking reading moves the crossing
        result = text(form.query_one("#result"))
        assert "80 % of the" in result and "(over)" not in result and "previous" in result
        assert f"was P10 {old.p10_date.isoformat()}" in result and after.p10_date.isoformat() in result
        await pilot.press("escape")
        await settle(app, pilot)
        fleet = app.screen
        assert isinstance(fleet, FleetScreen)
        row = [str(c) for c in fleet.query_one("#fleet-table").get_row_at(fleet.serials.index(pf.serial))]
        assert after.p10_date.isoformat() in row and old.p10_date.isoformat() not in row


async def test_a_bad_value_shows_the_message_and_writes_nothing(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        before = demo_store.counts()["readings"]
        form = await open_form(app, pilot, pf.serial, "r")
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", case_drain="9999", oil_temp="50")
        await pilot.pause()
        message = text(form.fields["case_drain"].query_one(".field-message"))
        assert message.startswith("Case drain '9999': must be a number from 0 to 400 L/min")  # the label on screen
        assert form.fields["case_drain"].has_class("-bad")
        await pilot.press("f2")
        await settle(app, pilot)
        assert "not saved" in text(form.query_one("#check"))
        assert demo_store.counts()["readings"] == before


async def test_the_store_dry_run_catches_a_meter_running_backwards(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        before = demo_store.counts()["readings"]
        form = await open_form(app, pilot, pf.serial, "r")
        fill(form, machine_hours="1", servo_pressure="25")
        await settle(app, pilot)
        message = text(form.fields["machine_hours"].query_one(".field-message"))
        assert "runs backwards" in message  # the store's own words, found before saving
        await pilot.press("f2")
        await settle(app, pilot)
        assert "Not saved, nothing was written" in text(form.query_one("#check"))
        assert demo_store.counts()["readings"] == before


async def test_save_and_next_moves_along_the_fleet_order(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        order, form = await press_on_fleet(app, pilot, "r")
        assert form.serial == order[0] and form.following[:2] == order[1:3]
        machine = app.pump_forecast(order[0]).machine
        fill(form, machine_hours=f"{meter_now(app, machine):.0f}", servo_pressure="24.5", case_drain="", oil_temp="")
        await pilot.press("f3")
        await settle(app, pilot)
        assert form.serial == order[1]
        assert [r.servo_pressure_bar for r in demo_store.readings(order[0]) if r.taken_on == TODAY] == [24.5]
        assert form.fields["machine_hours"].text == ""  # the last pump's values are gone
        assert f"Saved: pump {order[0]}" in form.query_one("#result").border_title
        await pilot.press("f4")  # skip one
        assert form.serial == order[2]


async def test_an_overhaul_restarts_the_trend(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        form = await open_form(app, pilot, pf.serial, "e")
        assert isinstance(form, EventScreen) and form.kind.value == "overhaul"
        fill(form, hours=f"{meter_now(app, pf.machine):.0f}", technician="Test Person", note="rebuilt")
        await settle(app, pilot)
        assert "accepts" in text(form.query_one("#check"))
        await pilot.press("f2")
        await settle(app, pilot)
        events = [e for e in demo_store.events(pf.serial) if e.happened_on == TODAY]
        assert [e.kind.value for e in events] == ["overhaul"]
        after = app.pump_forecast(pf.serial)
        assert all(k.n_readings == 0 for k in after.kinds)  # every kind starts a new segment
        assert all(k.outcome in (Outcome.TOO_FEW, Outcome.NO_DATA) for k in after.kinds)
        assert after.hours_since_overhaul < pf.hours_since_overhaul / 10  # counted from the overhaul now
        assert "New trends start for case drain" in text(form.query_one("#result"))


async def test_an_event_with_a_missing_hour_meter_is_refused(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        before = len(demo_store.events())
        form = await open_form(app, pilot, pf.serial, "e")
        await pilot.press("f2")
        await settle(app, pilot)
        message = text(form.fields["hours"].query_one(".field-message"))
        assert f"is required: the hour meter of {pf.machine}" in message
        assert len(demo_store.events()) == before


async def test_a_move_asks_for_the_target_and_checks_it(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        form = await open_form(app, pilot, pf.serial, "e")
        form.query_one("#kind").value = "move"
        await pilot.pause()
        assert not form.fields["to_machine"].has_class("-hidden")
        fill(form, hours=f"{meter_now(app, pf.machine):.0f}", to_machine="NO-SUCH", to_position="main", to_hours="10")
        await settle(app, pilot)
        assert "must be a known machine unit for a move" in text(form.fields["to_machine"].query_one(".field-message"))
        assert isinstance(form.query_one("#check"), Static)


async def test_a_reading_typed_in_us_units_is_stored_in_bar_and_litres(demo_store):
    from scipy import constants

    from logbook.tui.app import make_app
    from logbook.units import UnitPrefs

    app = make_app(demo_store, today=TODAY, units=UnitPrefs.us(), poll_seconds=0, blink=False)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        form = await open_form(app, pilot, pf.serial, "r")
        assert "psi" in str(form.fields["servo_pressure"].query_one(".field-unit").render())
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", servo_pressure="362.6", case_drain="",
             oil_temp="", test_pressure="")
        await pilot.press("f2")
        await settle(app, pilot)
        saved = [r for r in demo_store.readings(pf.serial) if r.taken_on == TODAY]
        # 1 psi = 6894.757 Pa and 1 bar = 1e5 Pa (NIST SP 811, via scipy.constants)
        assert len(saved) == 1 and abs(saved[0].servo_pressure_bar - 362.6 * constants.psi / constants.bar) < 1e-9
        assert abs(saved[0].servo_pressure_bar - 25.0) < 0.01


async def test_free_text_on_the_form_is_stored_exactly_as_typed(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        model = app.fleet.models[pf.model]
        form = await open_form(app, pilot, pf.serial, "r")
        typed_by, typed_note = "  Ann [night shift] ", " seals checked,  [/b] left as found "
        latest = next(k.latest_value for k in pf.kinds if k.kind is Kind.CASE_DRAIN)
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", case_drain=f"{latest:.2f}",
             oil_temp=f"{model.ref_temp_c:g}", test_pressure=f"{model.ref_pressure_bar:g}",
             test_speed=f"{model.test_speed_rpm:g}", oil_grade=str(model.oil_grade), oil_vi=f"{model.oil_vi:g}",
             technician=typed_by, note=typed_note)
        await settle(app, pilot)
        assert "accepts" in text(form.query_one("#check")), [(n, f._own_problem, f._store_problem) for n, f in form.fields.items() if f._own_problem or f._store_problem]
        await pilot.press("f2")
        await settle(app, pilot)
        saved = [r for r in demo_store.readings(pf.serial) if r.taken_on == TODAY]
        assert len(saved) == 1
        assert saved[0].technician == typed_by and saved[0].note == typed_note


async def test_oil_outside_the_test_window_is_asked_about_before_saving(demo_app, demo_store):
    # Issue 12 item 7: a reading outside the model's test window is saved only after an explicit confirm
    # (the model's window as stored: test_temp_min_c..test_temp_max_c); its measured viscosity is kept.
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        model = app.fleet.models[pf.model]
        before_count = demo_store.counts()["readings"]
        form = await open_form(app, pilot, pf.serial, "r")
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", servo_pressure="24.5", case_drain="",
             oil_temp=f"{model.test_temp_max_c + 25:g}", nu40_cst="47.5 mm2/s", nu100_cst="7.0")
        await settle(app, pilot)
        check = text(form.query_one("#check"))
        assert "Oil temperature" in check and "outside the test window" in check
        await pilot.press("f2")
        await settle(app, pilot)
        assert demo_store.counts()["readings"] == before_count  # asked, not saved
        await pilot.press("f2")  # confirmed
        await settle(app, pilot)
        assert demo_store.counts()["readings"] == before_count + 1
        saved = [r for r in demo_store.readings(pf.serial) if r.taken_on == TODAY]
        assert len(saved) == 1 and (saved[0].nu40_cst, saved[0].nu100_cst) == (47.5, 7.0)


async def test_an_exchange_names_the_pump_fitted_in_and_checks_it(demo_app, demo_store):
    """The event form asks an exchange for the pump that went in: an unknown serial is refused
    on its field and nothing is written; a spare pump on record is fitted in the same place."""
    from logbook.model import Pump

    app = demo_app
    spare = "SPARE-TUI-1"
    any_model = next(iter(demo_store.pumps().values())).model
    demo_store.add_pumps([(Pump(serial=spare, model=any_model), None)], today=TODAY)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        before = len(demo_store.events())
        form = await open_form(app, pilot, pf.serial, "e")
        form.query_one("#kind").value = "exchange"
        await pilot.pause()
        assert not form.fields["serial_in"].has_class("-hidden")
        assert form.fields["to_machine"].has_class("-hidden")
        fill(form, hours=f"{meter_now(app, pf.machine):.0f}", serial_in="NO-SUCH-PUMP")
        await pilot.press("f2")
        await settle(app, pilot)
        assert "must be a known pump serial" in text(form.fields["serial_in"].query_one(".field-message"))
        assert len(demo_store.events()) == before
        fill(form, serial_in=spare)
        await settle(app, pilot)
        await pilot.press("f2")
        await settle(app, pilot)
        saved = [e for e in demo_store.events(pf.serial) if e.happened_on == TODAY]
        assert [(e.kind.value, e.serial_in) for e in saved] == [("exchange", spare)]
        went_in = [f for f in demo_store.fitments(serial=spare) if f.removed_on is None]
        assert [(f.machine, f.fitted_on) for f in went_in] == [(pf.machine, TODAY)]
