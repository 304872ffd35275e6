"""Round sheets: the pumps to test at one site, grouped by machine, as md, html or csv.

md and html are for paper: the safety list first, then per pump the test conditions, the last
values and limits, and blank cells to fill in. csv starts with the safety list as comment rows
(first cell starting with "#", which the importer skips), then has exactly the readings-import
columns (logbook.imports), prefilled with serial, machine, test pressure and test speed,
so the filled-in file goes straight back with ``logbook import readings FILE``.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from datetime import date
from html import escape

from logbook import fmt, units
from logbook.analysis.results import FleetForecast
from logbook.cautions import SAFETY, Safety
from logbook.csvread import quote_formula
from logbook.exports import safety
from logbook.exports.common import keep_whole
from logbook.imports import COLUMNS
from logbook.model import ALL_KINDS, Fleet, Kind, PumpModel, Reading
from logbook.rounds import NextTest
from logbook.units import UnitPrefs

FORMATS = ("md", "html", "csv")
#: The readings-import columns, in the importer's order.
CSV_COLUMNS: tuple[str, ...] = tuple(COLUMNS["readings"])


@dataclass(frozen=True)
class Stop:
    """One pump on the round: why it is tested, its model, its last reading."""

    test: NextTest
    model: PumpModel
    last: Reading | None
    at_reference: dict[Kind, float | None] = field(default_factory=dict)  # latest normalized values


@dataclass(frozen=True)
class RoundSheet:
    site: str
    made_on: date
    test_by: date  # pumps whose test date falls on or before this day
    database: str
    stops: tuple[Stop, ...]
    machines: dict[str, str]  # unit -> description
    units: UnitPrefs = UnitPrefs()
    safety: Safety = SAFETY

    def by_machine(self) -> list[tuple[str, list[Stop]]]:
        groups: dict[str, list[Stop]] = {}
        for stop in self.stops:
            groups.setdefault(stop.test.machine, []).append(stop)
        return list(groups.items())


def build_sheet(
    fleet: Fleet, forecast: FleetForecast | None, tests: list[NextTest], *, site: str, made_on: date,
    test_by: date, units: UnitPrefs | None = None,
) -> RoundSheet:  # fmt: skip
    """Collect what the sheet shows for the chosen tests (from ``rounds.plan_round``)."""
    wanted = {t.serial for t in tests}
    last: dict[str, Reading] = {}  # the newest current reading of each pump on the sheet, in one pass
    for r in fleet.readings:  # (by date and meter; of equal ones the later record, as a stable sort gives)
        if r.serial in wanted and r.superseded_by is None:
            held = last.get(r.serial)
            if held is None or (r.taken_on, r.machine_hours) >= (held.taken_on, held.machine_hours):
                last[r.serial] = r
    stops = []
    for t in tests:
        pf = forecast.pump(t.serial) if forecast is not None else None
        at_ref = {k.kind: k.latest_value for k in pf.kinds} if pf is not None else {}
        stops.append(Stop(t, fleet.models[t.model], last.get(t.serial), at_ref))
    machines = {t.machine: fleet.machines[t.machine].description for t in tests if t.machine in fleet.machines}
    return RoundSheet(site=site, made_on=made_on, test_by=test_by, database=fleet.source, stops=tuple(stops),
                      machines=machines, units=units or UnitPrefs())


def render(sheet: RoundSheet, fmt_name: str) -> bytes:
    if fmt_name == "csv":
        return render_csv(sheet).encode("utf-8")
    if fmt_name == "md":
        return render_md(sheet).encode("utf-8")
    if fmt_name == "html":
        return render_html(sheet).encode("utf-8")
    raise ValueError(f"format = {fmt_name!r}: allowed are {', '.join(FORMATS)}")


# -- csv -----------------------------------------------------------------------------
def _unit_of(name: str, prefs: UnitPrefs) -> str:
    """The user's unit for a readings column ("" when the canonical unit is used)."""
    spec = COLUMNS["readings"][name].spec
    chosen = {units.PRESSURE.name: prefs.pressure, units.FLOW.name: prefs.flow,
              units.TEMPERATURE.name: prefs.temperature}.get(spec.quantity.name) if spec else None
    return chosen if chosen and chosen != spec.quantity.canonical else ""


def _number(value: float, digits: int = 1) -> str:
    text = f"{value:.{digits}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def render_csv(sheet: RoundSheet) -> str:
    prefs = sheet.units
    header = [f"{name} [{_unit_of(name, prefs)}]" if _unit_of(name, prefs) else name for name in CSV_COLUMNS]
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n")
    for line in safety.comment_lines(sheet.safety):
        writer.writerow([quote_formula(line)])
    writer.writerow([quote_formula(cell) for cell in header])
    for stop in sheet.stops:
        row = dict.fromkeys(CSV_COLUMNS, "")
        row["serial"] = stop.test.serial
        row["machine"] = stop.test.machine
        row["position"] = stop.test.position  # checked on import: where the pump sits
        row["test_pressure"] = _number(units.from_canonical(stop.model.ref_pressure_bar, _unit_of("test_pressure", prefs) or "bar"))
        row["test_speed"] = _number(stop.model.test_speed_rpm, 0)
        writer.writerow([quote_formula(row[name]) for name in CSV_COLUMNS])  # read back by csvread
    return buf.getvalue()


# -- what the paper forms show --------------------------------------------------------------
def conditions(model: PumpModel, prefs: UnitPrefs) -> str:
    return (f"speed {model.test_speed_rpm:g} rpm; test pressure {fmt.pressure(model.ref_pressure_bar, prefs)} "
            f"(the model's reference); oil temperature {fmt.temperature(model.test_temp_min_c, prefs)} to "
            f"{fmt.temperature(model.test_temp_max_c, prefs)}")


def limit_words(model: PumpModel, kind: Kind, prefs: UnitPrefs) -> str:
    lim = model.limit(kind)
    if lim is None:
        return "no limit set"
    words = f"{lim.direction} {fmt.value(kind, lim.value, prefs)}"
    if kind is Kind.CASE_DRAIN:
        return words + " at reference"
    if kind is Kind.NEUTRAL_DRIFT:
        return "magnitude " + words
    return words


def last_words(stop: Stop, kind: Kind, prefs: UnitPrefs) -> str:
    raw = stop.last.value(kind) if stop.last is not None else None
    if raw is None:
        return "-"
    text = fmt.value(kind, raw, prefs)
    ref = stop.at_reference.get(kind)
    if kind is Kind.CASE_DRAIN and ref is not None:
        text += f" ({fmt.value(kind, ref, prefs)} at reference)"
    return text


def form_rows(stop: Stop, prefs: UnitPrefs) -> list[list[str]]:
    """(what, last, limit or target, blank) rows of one pump's form."""
    m, last = stop.model, stop.last
    rows = [[k.label, last_words(stop, k, prefs), limit_words(m, k, prefs), ""] for k in ALL_KINDS]
    rows += [
        ["charge pressure", fmt.pressure(last.charge_pressure_bar if last else None, prefs), "", ""],
        ["oil temperature", fmt.temperature(last.oil_temp_c if last else None, prefs),
         f"{fmt.temperature(m.test_temp_min_c, prefs)} to {fmt.temperature(m.test_temp_max_c, prefs)}", ""],
        ["test pressure", fmt.pressure(last.test_pressure_bar if last else None, prefs), fmt.pressure(m.ref_pressure_bar, prefs), ""],
        ["test speed", f"{last.test_speed_rpm:g} rpm" if last and last.test_speed_rpm else "-", f"{m.test_speed_rpm:g} rpm", ""],
        ["machine hours", f"{last.machine_hours:,.0f} h on {last.taken_on.isoformat()}" if last else "-", "", ""],
        ["oil grade (ISO VG) / VI", f"{last.oil_grade or m.oil_grade} / {last.oil_vi or m.oil_vi:g}" if last else "-", "", ""],
        ["ISO 4406", (last.iso4406 or "-") if last else "-", "", ""],
        ["date, technician", "", "", ""],
        ["note", "", "", ""],
    ]
    return rows


def _heading(sheet: RoundSheet) -> tuple[str, list[str]]:
    title = f"Reading round: {sheet.site}"
    facts = [f"Made on {sheet.made_on.isoformat()} from {sheet.database or 'the logbook'}",
             f"Pumps to test by {sheet.test_by.isoformat()}: {len(sheet.stops)}",
             "Fill in the blank cells; readings left blank are skipped at import, not rejected."]
    return title, facts


def _pump_title(stop: Stop) -> str:
    t = stop.test
    return f"{t.serial} - {t.position} - {t.model}"


def _pump_facts(stop: Stop, sheet: RoundSheet) -> list[str]:
    t = stop.test
    when = t.test_on.isoformat() if t.test_on else "-"
    return [f"Test by {when}: {t.reason}", f"Test conditions: {conditions(stop.model, sheet.units)}"]


# -- md ----------------------------------------------------------------------------------
_MD_SPECIAL = re.compile(r"([\\`*_\[\]<>|#])")


def md_escape(text: str) -> str:
    """Text safe in Markdown (and in a table cell): one line, markup characters escaped."""
    return _MD_SPECIAL.sub(r"\\\1", " ".join(str(text).split()))


def _md_table(headers: list[str], rows: list[list[str]]) -> list[str]:
    out = ["| " + " | ".join(md_escape(h) for h in headers) + " |", "|" + "---|" * len(headers)]
    out += ["| " + " | ".join(md_escape(c) if c else " " for c in row) + " |" for row in rows]
    return out


def render_md(sheet: RoundSheet) -> str:
    title, facts = _heading(sheet)
    lines = [f"# {md_escape(title)}", ""] + [f"- {md_escape(f)}" for f in facts]
    lines += safety.md_lines(md_escape, sheet.safety)
    if not sheet.stops:
        lines += ["", "No pump at this site is due for a reading in this period."]
    for machine, stops in sheet.by_machine():
        desc = sheet.machines.get(machine, "")
        lines += ["", f"## Machine {md_escape(machine)}" + (f" ({md_escape(desc)})" if desc else "")]
        for stop in stops:
            lines += ["", f"### {md_escape(_pump_title(stop))}", ""]
            lines += [f"- {md_escape(f)}" for f in _pump_facts(stop, sheet)]
            lines += [""] + _md_table(["what", "last", "limit / target", "now"], form_rows(stop, sheet.units))
    return "\n".join(lines) + "\n"


# -- html ---------------------------------------------------------------------------------
#: Printed compactly (several pumps a page, A4 or Letter): the readings side by side, a tall
#: blank cell under each to write in, a pump never split across pages, a machine's heading
#: kept with its first pump; a serial, a date or a value never broken at a line end.
_CSS = """body{font-family:sans-serif;margin:1.5em;max-width:60em;font-size:11pt}
table{border-collapse:collapse;margin:.2em 0 .4em;width:100%}th,td{border:1px solid #666;padding:.15em .35em;text-align:left;
vertical-align:top}
th{background:#eee;font-weight:600}td.fill{height:9mm;min-width:14mm}.k{white-space:nowrap}
table.values th.what{width:6.5em}table.values th.note{width:35%}table.values td,table.values th{font-size:9pt}
h2{margin:.8em 0 .2em;font-size:13pt;break-after:avoid}h3{margin:.5em 0 0;font-size:11pt;break-after:avoid}
p.facts{margin:.1em 0;font-size:9pt}
section.pump{break-inside:avoid;margin-bottom:.6em}
@page{size:auto;margin:10mm 12mm}
@media print{body{margin:0;max-width:none;font-size:10pt}h2+section.pump{break-before:avoid}
table.values td,table.values th{font-size:8pt;padding:.05em .25em;line-height:1.15}p.facts{font-size:8pt}
table{margin:.1em 0 .25em}h3{margin:.3em 0 0}section.pump{margin-bottom:.3em}}"""

#: form_rows rows shown side by side (a column each), and the ones shown as a line each
_SIDE_BY_SIDE = 7


def _cell(text: str) -> str:
    word = text and len(text) <= 24 and not any(c.isspace() for c in text)
    return f'<td class="k">{escape(text)}</td>' if word else f"<td>{keep_whole(escape(text))}</td>"


def _pump_html(stop: Stop, sheet: RoundSheet) -> list[str]:
    rows = form_rows(stop, sheet.units)
    side, lines = rows[:_SIDE_BY_SIDE], rows[_SIDE_BY_SIDE:]
    out = ['<section class="pump">', f"<h3>{escape(_pump_title(stop))}</h3>"]
    out += [f'<p class="facts">{keep_whole(escape(f))}</p>' for f in _pump_facts(stop, sheet)]
    out.append('<table class="values"><thead><tr><th class="what"></th>'
               + "".join(f"<th>{escape(what)}</th>" for what, *_ in side) + "</tr></thead><tbody>")
    out.append('<tr><th class="what">last</th>' + "".join(_cell(last) for _, last, _, _ in side) + "</tr>")
    out.append('<tr><th class="what">limit / target</th>' + "".join(_cell(limit) for _, _, limit, _ in side) + "</tr>")
    out.append('<tr><th class="what">now</th>' + '<td class="fill"></td>' * len(side) + "</tr>")
    out.append("</tbody></table>")
    out.append('<table class="values"><thead><tr><th class="what"></th>'
               + "".join(f'<th class="{"note" if what == "note" else ""}">{escape(what)}</th>' for what, *_ in lines)
               + "</tr></thead><tbody>")
    out.append('<tr><th class="what">last</th>' + "".join(_cell(last if last != "-" else "") for _, last, _, _ in lines)
               + "</tr>")
    out.append('<tr><th class="what">now</th>' + '<td class="fill"></td>' * len(lines) + "</tr>")
    out.append("</tbody></table>")
    out.append("</section>")
    return out


def render_html(sheet: RoundSheet) -> str:
    title, facts = _heading(sheet)
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">', f"<title>{escape(title)}</title>",
           f"<style>{_CSS}\n{safety.CSS}</style></head><body>", f"<h1>{escape(title)}</h1>", "<ul>"]
    out += [f"<li>{escape(f)}</li>" for f in facts] + ["</ul>"]
    out += safety.html_lines(sheet.safety)
    if not sheet.stops:
        out.append("<p>No pump at this site is due for a reading in this period.</p>")
    for machine, stops in sheet.by_machine():
        desc = sheet.machines.get(machine, "")
        out.append(f"<h2>Machine {escape(machine)}" + (f" ({escape(desc)})" if desc else "") + "</h2>")
        for stop in stops:
            out += _pump_html(stop, sheet)
    out.append("</body></html>")
    return "\n".join(out) + "\n"
