"""The plan screen states the plan settings it used, edits them (stored and audited, the
same ones `logbook forecast` uses) and exports to a path the planner types."""

from __future__ import annotations

import json

from textual.widgets import Input

from logbook.plan_setup import PlanSetup
from logbook.tui.screens.plan import PlanScreen
from logbook.tui.screens.plan_settings import PlanSettingsScreen
from tests.tui.conftest import settle
from tests.tui.screen_text import screen_text
from tests.tui.test_entry import text


async def _opened(app, pilot, key: str, kind):
    """The screen ``key`` opens, checked to be a ``kind``."""
    await pilot.press(key)
    await settle(app, pilot)
    assert isinstance(app.screen, kind)
    return app.screen


async def _plan(app, pilot) -> PlanScreen:
    await settle(app, pilot)
    return await _opened(app, pilot, "p", PlanScreen)


def _said(screen, selector) -> str:
    return " ".join(text(screen.query_one(selector)).split())


async def test_stored_settings_are_used_and_stated(demo_store, demo_app):
    demo_store.set_plan_setup(PlanSetup(horizon_months=9, capacity_per_month=1, exchange_on_hand={"TQ-90": 2}))
    async with demo_app.run_test(size=(80, 24)) as pilot:
        screen = await _plan(demo_app, pilot)
        assert len(screen.plan.settings.months) == 9 and screen.plan.settings.capacity_per_month == 1
        assert all(n <= 1 for n in screen.plan.shop_load.values())
        said = _said(screen, "#assumptions")
        assert "shop capacity 1 job a month" in said and "exchange pumps TQ-90 2" in said and "horizon 9 months" in said
        status = _said(screen, "#status-line")
        shop = sum(1 for line in screen.plan.lines if line.shop)
        assert f"({shop} in the shop, {len(screen.plan.lines) - shop} on the machine)" in status


async def test_settings_edited_on_the_plan_screen_are_stored_audited_and_planned_with(demo_store, demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        screen = await _plan(demo_app, pilot)
        await pilot.press("s")
        await settle(demo_app, pilot)
        form = demo_app.screen
        assert isinstance(form, PlanSettingsScreen)
        form.fields["capacity"].input.value = "1"
        first_site = form.sites[0]
        form.fields["site_0"].input.value = "1"
        form.fields["turnaround"].input.value = "2"
        await pilot.press("f2")
        await settle(demo_app, pilot)
        stored = demo_store.plan_setup()
        assert (stored.capacity_per_month, stored.site_capacity, stored.turnaround_months) == (1, {first_site: 1}, 2)
        row = next(iter(demo_store.db.query("SELECT * FROM audit WHERE row_key = 'plan'")))
        assert row["who"] == "tester" and json.loads(row["after_json"])["capacity_per_month"] == 1
        await pilot.press("escape")
        await settle(demo_app, pilot)
        assert demo_app.screen is screen
        assert screen.plan.settings.capacity_per_month == 1 and screen.plan.settings.turnaround_months == 2
        assert all(n <= 1 for n in screen.plan.shop_load.values())
        assert f"per site {first_site} 1" in _said(screen, "#assumptions")


async def _settings_form(app, pilot) -> PlanSettingsScreen:
    await _plan(app, pilot)
    return await _opened(app, pilot, "s", PlanSettingsScreen)


async def test_a_bad_setting_is_refused_naming_the_field_and_nothing_is_stored(demo_store, demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        form = await _settings_form(demo_app, pilot)
        form.fields["horizon"].input.value = "0"
        form.fields["capacity"].input.value = "two"
        await pilot.press("f2")
        await settle(demo_app, pilot)
        check = _said(form, "#check")
        assert "not saved" in check and "2 field(s) to fix" in check
        assert "Shop capacity 'two'" in _said(form, "#field-capacity .field-message")  # the label on screen
        assert "Horizon '0': a whole number of months from 1 to 60" in check  # on the same F2
        assert form.fields["horizon"].has_class("-bad") and form.fields["capacity"].has_class("-bad")
        assert demo_store.plan_setup() == PlanSetup()


async def test_every_bad_setting_is_named_on_one_f2_and_nothing_is_written(demo_store, demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        form = await _settings_form(demo_app, pilot)
        audit = len(demo_store.audit_trail())
        form.fields["capacity"].input.value = "-2"  # refused by the field itself
        form.fields["horizon"].input.value = "0"  # by the plan's limits, on the same press
        form.fields["turnaround"].input.value = "30"
        form.fields["site_0"].input.value = "-1"
        await pilot.press("f2")
        await settle(demo_app, pilot)
        check = _said(form, "#check")
        assert "not saved" in check and "4 field(s) to fix" in check
        for said in ("Shop capacity '-2': must be a whole number of jobs a month, 0 or more", "Horizon '0': a whole number of months from 1 to 60",
                     "Turnaround '30': 0 to 24 months", "'-1': must be a whole number of jobs a month, 0 or more"):
            assert said in check, said
        assert form.sites[0] in check  # the site is named
        assert all(form.fields[n].has_class("-bad") for n in ("capacity", "horizon", "turnaround", "site_0"))
        assert demo_store.plan_setup() == PlanSetup() and len(demo_store.audit_trail()) == audit
        form.fields["horizon"].input.value = "12"  # mended ones leave the list; the rest stay
        await settle(demo_app, pilot)
        check = _said(form, "#check")
        assert "3 field(s) to fix" in check and "Horizon" not in check and "Turnaround '30'" in check


async def test_blank_settings_read_as_no_limit_and_0_exchange_pumps_as_none_on_hand(demo_store, demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        screen = await _plan(demo_app, pilot)
        said = _said(screen, "#assumptions")
        assert "exchange pumps no limit set" in said and "none on hand" not in said  # blank: the plan sets no limit
        await pilot.press("s")
        await settle(demo_app, pilot)
        form = demo_app.screen
        blanks = [n for n in form.fields if n.startswith(("site_", "model_"))]
        assert blanks and {form.fields[n].input.placeholder for n in blanks} == {"blank: no limit"}
        shown = screen_text(demo_app)
        assert "jobs a month" in shown and "pumps on hand" in shown  # the units whole at 80 columns
        zero, other = form.models[0], form.models[1]
        form.fields["model_0"].input.value = "0"
        await pilot.press("f2")
        await settle(demo_app, pilot)
        assert demo_store.plan_setup().exchange_on_hand == {zero: 0}
        await pilot.press("escape")
        await settle(demo_app, pilot)
        said = _said(screen, "#assumptions")
        assert f"exchange pumps {zero} none on hand, other models no limit set" in said and other not in said


async def test_export_goes_to_the_path_typed_in_the_format_of_its_suffix(demo_app, tmp_path):
    target = tmp_path / "for-the-shop" / "plan.html"
    target.parent.mkdir()
    async with demo_app.run_test(size=(80, 24)) as pilot:
        screen = await _plan(demo_app, pilot)
        await pilot.press("x")
        await settle(demo_app, pilot)
        box = demo_app.screen.query_one("#export-path", Input)
        box.value = str(tmp_path / "plan.pdf")
        await pilot.press("enter")
        await settle(demo_app, pilot)
        assert ".pdf is not a format" in " ".join(text(demo_app.screen.query_one("#export-problem")).split())
        box.value = str(target)
        await pilot.press("enter")
        await settle(demo_app, pilot)
        assert demo_app.screen is screen
    assert sorted(p.name for p in target.parent.iterdir()) == ["plan.html"]
    html = target.read_text()
    assert html.lstrip().lower().startswith("<!doctype html") and screen.plan.lines[0].serial in html
    assert not (tmp_path / "plan.pdf").exists()


async def test_export_from_the_plan_screen_is_in_the_apps_units(demo_store, tmp_path):
    # `logbook --units us` reaches the plan the fleet view exports (values in psi and gpm)
    from logbook.tui.app import make_app
    from logbook.units import UnitPrefs
    from tests.tui.conftest import TODAY

    app = make_app(demo_store, today=TODAY, units=UnitPrefs.us(), poll_seconds=0, blink=False, export_dir=tmp_path)
    target = tmp_path / "plan.json"
    async with app.run_test(size=(80, 24)) as pilot:
        await _plan(app, pilot)
        await pilot.press("x")
        await settle(app, pilot)
        app.screen.query_one("#export-path", Input).value = str(target)
        await pilot.press("enter")
        await settle(app, pilot)
    doc = json.loads(target.read_text())
    assert doc["units"]["pressure"] == "psi" and doc["units"]["flow"] == "gpm"
    assert {r["unit"] for r in doc["forecasts"]} <= {"psi", "gpm"}


async def test_settings_messages_say_why_and_mark_every_bad_field(demo_app):
    async with demo_app.run_test(size=(120, 40)) as pilot:
        form = await _settings_form(demo_app, pilot)
        form.fields["turnaround"].input.value = "0.5"
        form.fields["site_0"].input.value = "1,5"
        form.fields["model_0"].input.value = "x"
        await pilot.press("f2")
        await settle(demo_app, pilot)
        turnaround = _said(form.fields["turnaround"], ".field-message")
        assert "whole number" in turnaround and "0 to 24" in turnaround
        site = _said(form.fields["site_0"], ".field-message")
        assert "whole number" in site and "decimal comma" in site
        rows = screen_text(demo_app).splitlines()
        for name in ("turnaround", "site_0", "model_0"):  # the mark is on screen, not cut off
            label = form.fields[name].label_text
            assert any(label in row and "✗" in row for row in rows), name
        assert "whole number" in _said(form.fields["model_0"], ".field-message")
