"""The reading form from the keyboard: Enter past the last field stays in the form, Esc
asks before typed values are dropped, prefills are only the model's test conditions and
the signed-in user (marked until changed, the date never carried to the next pump), a
value that looks wrong is asked about and saved on a second F2, every field and message
fits 80x24, and the keystrokes for one reading from the fleet view are counted."""

from __future__ import annotations

from logbook.tui.screens.confirm import ConfirmLeave
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.reading import ReadingScreen
from tests.tui.conftest import TODAY, press_on_fleet, settle
from tests.tui.screen_text import screen_text
from tests.tui.test_entry import crossing_pump, fill, meter_now, open_form, text


async def test_enter_past_the_last_field_stays_in_the_form(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        form = await open_form(app, pilot, crossing_pump(app).serial, "r")
        form.fields["note"].input.focus()
        await pilot.pause()
        await pilot.press("enter", "enter", "down", "t")
        await settle(app, pilot)
        assert app.screen is form and app.focused is form.fields["note"].input
        assert form.fields["note"].text == "t"  # typed into the field, not the theme key
        await pilot.press("tab")  # Tab wraps to the first field
        assert app.focused is form.fields["date"].input


async def test_esc_asks_before_typed_values_are_dropped(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        form = await open_form(app, pilot, crossing_pump(app).serial, "r")
        await pilot.press("1", "2", "3")
        await pilot.press("escape")
        await pilot.pause()
        assert isinstance(app.screen, ConfirmLeave)
        await pilot.press("n")
        await pilot.pause()
        assert app.screen is form and form.fields["machine_hours"].text == "123"
        await pilot.press("f1")  # help on top, then back: the form and its values stay
        await pilot.pause()
        await pilot.press("escape")
        await pilot.pause()
        assert app.screen is form and form.fields["machine_hours"].text == "123"
        await pilot.press("escape", "y")
        await settle(app, pilot)
        assert isinstance(app.screen, FleetScreen)


async def test_esc_on_an_untouched_form_leaves_at_once(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        await open_form(app, pilot, crossing_pump(app).serial, "r")
        await pilot.press("escape")
        await settle(app, pilot)
        assert isinstance(app.screen, FleetScreen)


async def test_prefills_are_the_models_test_conditions_and_the_signed_in_user(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        model = app.fleet.models[pf.model]
        form = await open_form(app, pilot, pf.serial, "r")
        assert form.fields["test_pressure"].text == f"{model.ref_pressure_bar:g}"
        assert form.fields["test_speed"].text == f"{model.test_speed_rpm:g}"
        assert form.fields["technician"].text == demo_store.user == "tester"  # not the last reading's name
        assert form.fields["technician"].has_class("-prefilled")
        assert not form.fields["machine_hours"].has_class("-prefilled")
        form.fields["technician"].input.focus()
        await pilot.pause()
        await pilot.press("x")
        await pilot.pause()
        assert not form.fields["technician"].has_class("-prefilled")  # touched


async def test_without_a_name_given_the_technician_is_the_login_the_commands_record_as(demo_db, monkeypatch):
    # `logbook` without --as: the opener has no user; the form offers the login name, found as
    # every command's store finds it (store.core.default_user), and the saved reading keeps it
    from logbook.store import Store, core
    from logbook.tui.app import make_app
    from logbook.tui.gate import StoreOpener

    monkeypatch.setattr(core, "default_user", lambda: "login-name")
    app = make_app(StoreOpener(demo_db), today=TODAY, poll_seconds=0, blink=False)
    try:
        async with app.run_test(size=(80, 24)) as pilot:
            order, form = await press_on_fleet(app, pilot, "r")
            assert isinstance(form, ReadingScreen) and form.serial == order[0]
            assert form.fields["technician"].text == "login-name" == app.store.user
            assert form.fields["technician"].has_class("-prefilled")
            fill(form, machine_hours=f"{meter_now(app, app.pump_forecast(order[0]).machine):.0f}",
                 servo_pressure="24.5", case_drain="", oil_temp="")
            await pilot.press("f2")
            await settle(app, pilot)
    finally:
        app.gate.close()
    with Store(demo_db, create=False, user="checker") as store:
        saved = [r for r in store.readings(order[0]) if r.taken_on == TODAY]
    assert [(r.technician, r.entered_by) for r in saved] == [("login-name", "login-name")]


async def test_the_date_is_not_carried_to_the_next_pump(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        order, form = await press_on_fleet(app, pilot, "r")
        last = app.fleet.history(order[0]).readings[-1]
        fill(form, date="2026-11-30", machine_hours=f"{meter_now(app, app.pump_forecast(order[0]).machine):.0f}",
             servo_pressure=f"{last.servo_pressure_bar or 25:g}", case_drain="", oil_temp="")
        await pilot.press("f3")
        await settle(app, pilot)
        assert [r.taken_on.isoformat() for r in demo_store.readings(order[0]) if r.technician == "tester"] == ["2026-11-30"]
        assert form.serial == order[1] and form.fields["date"].text == TODAY.isoformat()


async def test_a_value_that_looks_wrong_is_asked_about_then_saved_on_a_second_f2(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        last = app.fleet.history(pf.serial).readings[-1]
        form = await open_form(app, pilot, pf.serial, "r")
        before = demo_store.counts()["readings"]
        jump = meter_now(app, pf.machine) + 100_000
        fill(form, machine_hours=f"{jump:.0f}", servo_pressure=f"{last.servo_pressure_bar or 25:g}", case_drain="",
             oil_temp="")
        await pilot.press("f2")
        await settle(app, pilot)
        check = text(form.query_one("#check"))
        assert "look wrong" in check and "Hour meter" in check and "more than 24 h a day" in check
        assert "F2 again" in check and demo_store.counts()["readings"] == before
        assert f"Hour meter {jump:,.0f} h" in screen_text(app)  # the reason is on the 80x24 screen
        await pilot.press("f2")
        await settle(app, pilot)
        assert demo_store.counts()["readings"] == before + 1


async def test_every_field_its_message_and_the_verdict_fit_80x24(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        form = await open_form(app, pilot, pf.serial, "r")
        await pilot.press("escape")
        await settle(app, pilot)
        form = await open_form(app, pilot, pf.serial, "r")  # the second form: the warning alone
        fill(form, machine_hours="2295O", case_drain="abc", servo_pressure="9999")
        await settle(app, pilot)
        shown = screen_text(app)
        assert len(shown.splitlines()) <= 24
        for field in form.fields.values():
            assert field.label_text in shown, field.label_text
        for message in ("Hour meter '2295O'", "Case drain 'abc'", "Servo pressure '9999'", "3 field(s) to fix"):
            assert message in shown, message
        assert "WARNING" in shown and "F6" in shown  # the warning and the key to the whole list
        assert "machine_hours" not in shown and "case_drain" not in shown


def keystrokes_for_one_reading(app, pf) -> tuple[list[str], int]:
    """From the fleet view to saved: type the serial (the table jumps to it), Enter opens
    the pump, r the form; the values with Tab between, F2 saves. Returns the keys and how
    many of them are the values themselves."""
    last = app.fleet.history(pf.serial).readings[-1]
    model = app.fleet.models[pf.model]
    values = [f"{meter_now(app, pf.machine):.0f}", f"{(last.case_drain_lpm or 2.0):.2f}",
              f"{(last.servo_pressure_bar or 25.0):.1f}", f"{(last.neutral_drift_bar or 1.0):.1f}",
              f"{(model.test_temp_min_c + model.test_temp_max_c) / 2:.0f}"]
    keys = [*pf.serial, "enter", "r"]
    for i, value in enumerate(values):
        keys += list(value)
        if i < len(values) - 1:
            keys.append("tab")
    keys.append("f2")
    return keys, len(pf.serial) + sum(len(v) for v in values)


async def test_the_keystrokes_for_one_reading_are_the_values_plus_seven(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        app.screen.query_one("#fleet-table").focus()
        keys, typed = keystrokes_for_one_reading(app, pf)
        before = demo_store.counts()["readings"]
        await pilot.press(*keys)
        await settle(app, pilot)
        for _ in range(40):
            if demo_store.counts()["readings"] > before:
                break
            await pilot.pause(0.05)
        assert isinstance(app.screen, ReadingScreen), type(app.screen)
        assert demo_store.counts()["readings"] == before + 1, text(app.screen.query_one("#check"))
        # Enter (pump), r (form), four Tabs, F2: written in docs/entry.md
        assert len(keys) - typed == 7
        saved = [r for r in demo_store.readings(pf.serial) if r.technician == "tester"]
        assert len(saved) == 1 and f"{saved[0].machine_hours:.0f}" == "".join(keys[len(pf.serial) + 2:]).split("tab")[0]


def _luminance(c) -> float:
    """Relative luminance (WCAG 2.1, definition of relative luminance: sRGB linearized)."""
    def lin(v):
        v /= 255
        return v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4
    return 0.2126 * lin(c.r) + 0.7152 * lin(c.g) + 0.0722 * lin(c.b)


async def test_input_boxes_stand_out_in_every_theme(demo_store):
    from logbook.tui.app import make_app

    for theme in ("textual-dark", "textual-light", "ansi-dark", "ansi-light"):
        app = make_app(demo_store, today=TODAY, poll_seconds=0, blink=False)
        app.theme = theme
        async with app.run_test(size=(80, 24)) as pilot:
            await settle(app, pilot)
            form = await open_form(app, pilot, crossing_pump(app).serial, "r")
            box = form.fields["case_drain"].input.background_colors[1]
            around = form.background_colors[1]
            if theme.startswith("ansi"):  # 16 colours: another colour than the terminal's own background
                assert box.ansi is not None and box.ansi != around.ansi, theme
            else:  # contrast ratio (L1 + 0.05) / (L2 + 0.05), WCAG 2.1; 1.5 is our own floor
                hi, lo = sorted((_luminance(box), _luminance(around)), reverse=True)
                assert (hi + 0.05) / (lo + 0.05) >= 1.5, theme


async def test_an_event_hour_meter_that_jumps_is_asked_about(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        form = await open_form(app, pilot, pf.serial, "e")
        before = len(demo_store.events())
        fill(form, hours=f"{meter_now(app, pf.machine) + 50_000:.0f}", note="rebuilt")
        await pilot.press("f2")
        await settle(app, pilot)
        assert "more than 24 h a day" in text(form.query_one("#check")) and len(demo_store.events()) == before
        await pilot.press("f2")
        await settle(app, pilot)
        assert len(demo_store.events()) == before + 1
