"""Edit one pump model's limits, reference conditions, test window and reading interval."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Container, VerticalScroll
from textual.widgets import Static

from logbook import fmt, units, validate
from logbook.model import ALL_KINDS, Kind, Limit, Problem, PumpModel
from logbook.tui.forms import FieldDef, _free, _number, _oil_grade
from logbook.tui.screens.entry import EntryScreen
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar

LIMIT_FIELDS = {Kind.CASE_DRAIN: "case_drain_limit", Kind.SERVO_PRESSURE: "servo_pressure_limit",
                Kind.NEUTRAL_DRIFT: "neutral_drift_limit"}


def model_fields(prefs) -> tuple[FieldDef, ...]:
    p, f, t = prefs.pressure, prefs.flow, prefs.temperature
    spec = validate.MODEL_FIELDS

    def num(name: str, unit: str, required: str = "") -> object:
        return _number(name, unit, required=required, specs=spec)

    need = "is required"
    return (
        FieldDef("case_drain_limit", "Case drain limit", num("case_drain_limit", f), f, "blank: none"),
        FieldDef("servo_pressure_limit", "Servo limit", num("servo_pressure_limit", p), p, "blank: none"),
        FieldDef("neutral_drift_limit", "Drift limit", num("neutral_drift_limit", p), p, "blank: none"),
        FieldDef("ref_temp", "Ref. temperature", num("ref_temp", t, need), t),
        FieldDef("ref_pressure", "Ref. pressure", num("ref_pressure", p, need), p),
        FieldDef("oil_grade", "Ref. oil ISO VG", _oil_grade, ""),
        FieldDef("oil_vi", "Ref. oil VI", num("oil_vi", "", need), ""),
        FieldDef("test_speed", "Test speed", num("test_speed", "rpm", need), "rpm"),
        FieldDef("test_temp_min", "Test oil from", num("test_temp_min", t, need), t),
        FieldDef("test_temp_max", "Test oil to", num("test_temp_max", t, need), t),
        FieldDef("reading_interval_hours", "Read every", num("reading_interval_hours", "h"), "h", "blank: none"),
        FieldDef("reading_interval_days", "... or every", num("reading_interval_days", "d"), "days", "blank: none"),
        FieldDef("description", "Description", _free, ""),
    )


def _text(value: float | None, unit: str) -> str:
    if value is None:
        return ""
    shown = units.from_canonical(value, unit) if unit else value
    return f"{shown:.4g}"


def model_prefill(m: PumpModel, prefs) -> dict[str, str]:
    p, f, t = prefs.pressure, prefs.flow, prefs.temperature
    out = {
        "ref_temp": _text(m.ref_temp_c, t), "ref_pressure": _text(m.ref_pressure_bar, p), "oil_grade": str(m.oil_grade),
        "oil_vi": _text(m.oil_vi, ""), "test_speed": _text(m.test_speed_rpm, ""), "test_temp_min": _text(m.test_temp_min_c, t),
        "test_temp_max": _text(m.test_temp_max_c, t),
        "reading_interval_hours": _text(m.reading_interval_hours, ""),
        "reading_interval_days": str(m.reading_interval_days) if m.reading_interval_days else "",
        "description": m.description,
    }
    for kind, name in LIMIT_FIELDS.items():
        lim = m.limit(kind)
        out[name] = _text(lim.value, f if kind is Kind.CASE_DRAIN else p) if lim else ""
    return out


class ModelEditScreen(EntryScreen):
    """Saved with ``store.update_model`` (audited, before and after)."""

    HELP_TITLE = "Edit model"

    def __init__(self, code: str) -> None:
        super().__init__()
        self.code = code

    def compose(self) -> ComposeResult:
        model = self.app.fleet.models[self.code]
        prefill = model_prefill(model, self.app.units)
        yield Plain(f"Model {self.code} · limits apply to readings normalized to the reference conditions", id="title")
        with VerticalScroll(classes="form", id="form"):
            with Container(classes="fields"):
                for d in model_fields(self.app.units):
                    yield self.make_field(d, prefill.get(d.name, ""))
            yield Plain("Change what you need; F2 saves, Esc goes back without saving.", id="check")
            yield Plain("", id="result")
        yield KeyBar()

    def on_mount(self) -> None:
        self.fields["case_drain_limit"].input.focus()

    def build_record(self, values) -> dict:
        old = self.app.fleet.models[self.code]
        limits = []
        for kind in ALL_KINDS:
            value = values.get(LIMIT_FIELDS[kind])
            if value is None:
                continue
            before = old.limit(kind)
            direction = before.direction if before else ("below" if kind is Kind.SERVO_PRESSURE else "above")
            limits.append(Limit(kind, float(value), direction))
        return {
            "limits": tuple(limits), "ref_temp_c": values["ref_temp"], "ref_pressure_bar": values["ref_pressure"],
            "oil_grade": values["oil_grade"] if values["oil_grade"] is not None else old.oil_grade,
            "oil_vi": values["oil_vi"], "test_speed_rpm": values["test_speed"], "test_temp_min_c": values["test_temp_min"],
            "test_temp_max_c": values["test_temp_max"], "reading_interval_hours": values.get("reading_interval_hours"),
            "reading_interval_days": int(values["reading_interval_days"]) if values.get("reading_interval_days") else None,
            "description": values.get("description") or "",
        }

    def dry_run(self, store, record) -> list[Problem] | None:
        return None  # the store checks a model only when it writes it

    def write(self, store, record) -> PumpModel:
        return store.update_model(self.code, **record)

    def saved(self, model: PumpModel) -> None:
        box = self.query_one("#result", Static)
        box.border_title = fmt.text(f"Saved model {model.code}")
        box.update("The forecast of every pump of this model is being updated. Esc goes back.")
        box.add_class("-shown")
        self.query_one("#check", Static).update(f"✓ Saved model {model.code}.")
