"""Keystrokes are never lost or misrouted: a whole reading typed as one burst (every key
queued before the first is handled, as a scanner, a paste or a very fast typist sends
them), once as is and once with the store's dry run slowed down, lands each value in its
own field and is stored exactly."""

from __future__ import annotations

import time

from textual import events
from textual.keys import _character_to_key

from logbook.model import Kind
from logbook.oil import nu100_from_vi
from logbook.tui.screens.reading import ReadingScreen
from tests.tui.conftest import TODAY, settle
from tests.tui.test_entry import crossing_pump, meter_now, open_form


def key_event(key: str) -> events.Key:
    """The Key event a terminal sends for one character or a named key ('tab', 'f2')."""
    if len(key) == 1:
        return events.Key(key if key.isalnum() else _character_to_key(key), key)
    return events.Key(key, None)


def burst(app, keys: list[str]) -> None:
    """Queue every key at once: nothing is handled before the last one is sent."""
    for key in keys:
        event = key_event(key)
        event.set_sender(app)
        app._driver.send_message(event)


def typed(text: str) -> list[str]:
    return list(text)


def expected_values(app, pf) -> tuple[str, str, str]:
    """Case drain, servo pressure and neutral drift as the pump's trend stands (its latest
    trended values; drift with the sign of its last reading): a reading nobody asks about."""
    latest = {kf.kind: kf.latest_value for kf in pf.kinds}
    last = app.fleet.history(pf.serial).readings[-1]
    sign = -1.0 if (last.neutral_drift_bar or 0) < 0 else 1.0
    return (f"{latest.get(Kind.CASE_DRAIN) or 2.0:.2f}", f"{latest.get(Kind.SERVO_PRESSURE) or 25.0:.1f}",
            f"{sign * (latest.get(Kind.NEUTRAL_DRIFT) or 1.0):.1f}")


def plan(app, pf):
    """What is typed into each field, in the form's order from the hour meter on, with
    the key that moves on after it (Tab, Enter or Down, mixed)."""
    model = app.fleet.models[pf.model]
    hours = f"{meter_now(app, pf.machine) + 0.4:.1f}"
    drain, servo, drift = expected_values(app, pf)
    temp = f"{model.ref_temp_c:.1f}"  # at reference conditions the normalized value is the reading
    pressure = f"{model.ref_pressure_bar:g}"
    speed = f"{model.test_speed_rpm:g}"
    return [
        ("machine_hours", hours, "tab"),
        ("case_drain", drain, "enter"),
        ("servo_pressure", servo, "down"),
        ("neutral_drift", drift, "tab"),
        ("oil_temp", temp, "enter"),
        ("test_pressure", pressure, "tab"),  # typed over the prefill (selected on entry)
        ("test_speed", speed, "tab"),
        ("oil_grade", str(model.oil_grade), "tab"),
        ("oil_vi", f"{model.oil_vi:g}", "tab"),
        ("nu40_cst", f"{model.oil_grade:g}", "tab"),  # the grade's midpoint and the 100 C value of its VI (D2270):
        ("nu100_cst", f"{nu100_from_vi(model.oil_grade, model.oil_vi):.3f}", "tab"),  # the reference oil measured
        ("charge_pressure", "21.5", "tab"),
        ("iso4406", "18/16/13", "tab"),
        ("technician", "Burst Typist", "tab"),
        ("note", "typed at once", None),
    ]


async def type_reading_at_once(app, pilot, store, slow_check: float = 0.0):
    await settle(app, pilot)
    pf = crossing_pump(app)
    form = await open_form(app, pilot, pf.serial, "r")
    assert isinstance(form, ReadingScreen)
    if slow_check:
        real = form.dry_run

        def slow(store_, record):
            time.sleep(slow_check)  # a machine under load: the check arrives late
            return real(store_, record)

        form.dry_run = slow
    steps = plan(app, pf)
    keys: list[str] = []
    for _name, value, move in steps:
        keys += typed(value)
        if move:
            keys.append(move)
    keys.append("f2")
    before = store.counts()["readings"]
    burst(app, keys)
    await pilot.pause(0.2)
    await settle(app, pilot)
    for _ in range(50):  # the save runs in a thread; wait for its answer
        if store.counts()["readings"] > before and not form.saving:
            break
        await pilot.pause(0.05)
        await app.workers.wait_for_complete()
    saved = [r for r in store.readings(pf.serial) if r.taken_on == TODAY]
    shown = {name: form.fields[name].text for name, _v, _m in steps}
    assert len(saved) == 1, (shown, str(form.query_one("#check").render()))
    r = saved[0]
    want = {name: value for name, value, _m in steps}
    got = {
        "machine_hours": f"{r.machine_hours:.1f}", "case_drain": f"{r.case_drain_lpm:.2f}",
        "servo_pressure": f"{r.servo_pressure_bar:.1f}", "neutral_drift": f"{r.neutral_drift_bar:.1f}",
        "oil_temp": f"{r.oil_temp_c:.1f}", "test_pressure": f"{r.test_pressure_bar:g}",
        "test_speed": f"{r.test_speed_rpm:g}", "oil_grade": str(r.oil_grade), "oil_vi": f"{r.oil_vi:g}",
        "charge_pressure": f"{r.charge_pressure_bar:g}", "iso4406": r.iso4406, "technician": r.technician,
        "note": r.note, "nu40_cst": f"{r.nu40_cst:g}", "nu100_cst": f"{r.nu100_cst:.3f}",
    }
    assert got == want  # every value in its own field, none lost, none shifted
    return form


async def test_a_reading_typed_as_one_burst_is_stored_exactly(demo_app, demo_store):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await type_reading_at_once(demo_app, pilot, demo_store)


async def test_a_burst_with_a_slow_check_is_stored_exactly(demo_app, demo_store):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        form = await type_reading_at_once(demo_app, pilot, demo_store, slow_check=0.6)
        assert form.fields["note"].text == "typed at once"  # a late check rewrote nothing


async def test_editing_keys_in_a_burst_apply_in_key_order(demo_app, demo_store):
    """Backspace, Ctrl+U, Home and Left are the input's own keys: the framework runs them
    only after they bubble up to the app, when the next characters have already been
    typed in; the form's inputs run them in place, in order."""
    async with demo_app.run_test(size=(80, 24)) as pilot:
        app = demo_app
        await settle(app, pilot)
        form = await open_form(app, pilot, crossing_pump(app).serial, "r")
        keys = [*"26.3", "backspace", "2", "tab", *"1x", "backspace", "5", "home", "2", "tab",
                *"1.0", "left", "left", "left", "-", "tab", "ctrl+u", *"55", "tab"]
        form.fields["case_drain"].input.focus()
        await pilot.pause()
        burst(app, keys)
        await pilot.pause(0.2)
        await settle(app, pilot)
        assert [form.fields[n].text for n in ("case_drain", "servo_pressure", "neutral_drift", "oil_temp")] == [
            "26.2", "215", "-1.0", "55"]
