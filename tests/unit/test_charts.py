"""The direct SVG charts: ticks, the calendar axis, geometry read back from the SVG, labels
clear of each other, the shop load per month, determinism."""

from __future__ import annotations

import random
import xml.etree.ElementTree as ET
from datetime import date

import numpy as np
import pytest

from logbook.exports.charts import (
    CHAR_EM,
    HEIGHT,
    LOAD_HEIGHT,
    WIDTH,
    ChartData,
    calendar_ticks,
    chart_svg,
    nice_ticks,
    shop_load_svg,
)

NS = {"s": "http://www.w3.org/2000/svg"}
D0 = date(2025, 1, 10).toordinal()


def test_ticks_agree_with_matplotlib_max_n_locator():
    # Reference: matplotlib.ticker.MaxNLocator with steps (1, 2, 2.5, 5, 10), ticks inside the view
    # (the same "nice number" rule as Heckbert, Graphics Gems 1990); test-only use of matplotlib.
    from matplotlib.ticker import MaxNLocator

    rng = random.Random(7)
    for _ in range(400):
        lo = rng.uniform(-100, 100) * 10 ** rng.randint(-3, 4)
        hi = lo + rng.uniform(0.01, 100) * 10 ** rng.randint(-3, 4)
        most = rng.choice([3, 4, 5, 6])
        span = hi - lo
        theirs = [t for t in MaxNLocator(most, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
                  if lo - 1e-9 * span <= t <= hi + 1e-9 * span]
        ours = nice_ticks(lo, hi, most)
        assert len(ours) == len(theirs) and np.allclose(ours, theirs, rtol=1e-9, atol=1e-9 * span), (lo, hi, most)


def test_calendar_ticks_are_month_starts_at_the_smallest_step_that_fits():
    # Reference: numpy's datetime64 calendar (Gregorian, proleptic): every month start inside the
    # range, then every k-th of them counted from January of year 0 (k = 1, 2, 3, 6, 12, 24, 60, ...)
    rng = random.Random(3)
    for _ in range(300):
        lo = date(2020, 1, 1).toordinal() + rng.randint(0, 3000)
        hi = lo + rng.randint(40, 9000)
        most = rng.randint(2, 10)
        first = np.datetime64(date.fromordinal(lo), "M")
        if np.datetime64(date.fromordinal(lo), "D") > np.datetime64(first, "D"):
            first += 1
        starts = np.arange(first, np.datetime64(date.fromordinal(hi), "M") + 1)
        index = starts.astype(int) + 1970 * 12  # months since January of year 0
        counts = {k: int(np.sum(index % k == 0)) for k in (1, 2, 3, 6, 12, 24, 60, 120, 240, 600)}
        fitting = [k for k, n in counts.items() if 1 <= n <= most]
        step = fitting[0] if fitting else max(k for k, n in counts.items() if n >= 1)
        picked = starts[index % step == 0]
        expected = [date.fromisoformat(str(np.datetime64(m, "D"))).toordinal() for m in picked]
        got = calendar_ticks(float(lo), float(hi), most)
        assert [v for v, _ in got] == expected, (lo, hi, most)
        for v, label in got:
            d = date.fromordinal(int(v))
            assert label == (f"{d.year:04d}" if step >= 12 else f"{d.year:04d}-{d.month:02d}")


def test_calendar_ticks_on_a_short_span_are_days():
    lo = date(2026, 3, 3).toordinal()
    got = calendar_ticks(lo, lo + 9, 6)
    # no month starts inside 2026-03-03 .. 2026-03-12: every 2nd day (every day would be 10 ticks)
    assert len(got) == 5 and np.all(np.diff([v for v, _ in got]) == 2) and all(lo <= v <= lo + 9 for v, _ in got)
    assert [label for _, label in got] == [date.fromordinal(int(v)).isoformat() for v, _ in got]


def _data(limit=8.0, used=None, crossings=None, span_days=720) -> ChartData:
    x = np.linspace(D0, D0 + span_days * 1.3, 80)
    slope = 6.0 / span_days
    mid = 1.0 + slope * (x - D0)
    rx = D0 + np.array([0.05, 0.2, 0.4, 0.65, 0.9]) * span_days
    ry = 1.0 + slope * (rx - D0) + np.array([0.1, -0.1, 0.05, 0.4, -0.05])
    used = np.ones(rx.size, bool) if used is None else np.asarray(used, bool)
    if crossings is None:
        crossings = (("P10", D0 + 1.1 * span_days), ("P50", D0 + 1.15 * span_days), ("P90", D0 + 1.2 * span_days))
    return ChartData(x=x, p10=mid - 0.6, p50=mid, p90=mid + 0.6, readings_x=rx, readings_y=ry, used=used,
                     limit=limit, now=D0 + 0.95 * span_days, crossings=crossings,
                     y_label="case drain [L/min]", middle_label="straight path")


def _scale(root, cls, attr, value=float):
    """The linear map pixel -> value given by the tick labels the SVG prints (least squares)."""
    ticks = root.findall(f".//s:text[@class='{cls}']", NS)
    values = np.array([value(t) for t in ticks])
    pixels = np.array([float(t.get(attr)) for t in ticks])
    slope, intercept = np.polyfit(pixels, values, 1)
    return lambda p: slope * np.asarray(p, float) + intercept, abs(slope)


def _day_of_label(t) -> float:
    """A month label read as the day it names (``YYYY-MM`` -> its first day)."""
    y, m = t.text.split("-")[:2] if "-" in t.text else (t.text, "1")
    return float(date(int(y), int(m), 1).toordinal())


def test_marks_sit_at_their_values_read_back_through_the_printed_ticks():
    d = _data(used=[True, True, True, False, True])
    root = ET.fromstring(chart_svg(d, "P-1 <x> & y", "c1"))  # well-formed XML, title escaped
    assert root.find("s:title", NS).text == "P-1 <x> & y"
    to_x, per_px_x = _scale(root, "xtick", "x", _day_of_label)  # the calendar read from the printed months
    to_y, per_px_y = _scale(root, "ytick", "y", lambda t: float(t.text))
    dots = root.findall(".//s:circle[@class='reading']", NS)
    assert len(dots) == 4 and len(root.findall(".//s:path[@class='aside']", NS)) == 1
    got_x = to_x([float(c.get("cx")) for c in dots])
    got_y = to_y([float(c.get("cy")) for c in dots])
    keep = d.used
    # coordinates are written to 0.1 px: the read-back is within a pixel's worth of value
    assert np.allclose(got_x, d.readings_x[keep], atol=per_px_x)
    assert np.allclose(got_y, d.readings_y[keep], atol=per_px_y)
    limit = root.find(".//s:line[@class='limit']", NS)
    assert to_y(float(limit.get("y1"))) == pytest.approx(8.0, abs=per_px_y)
    now = root.find(".//s:line[@class='now']", NS)
    assert to_x(float(now.get("x1"))) == pytest.approx(d.now, abs=per_px_x)
    marks = root.findall(".//s:line[@class='crossing']", NS)
    assert np.allclose(to_x([float(m.get("x1")) for m in marks]), [day for _, day in d.crossings], atol=per_px_x)
    # the band encloses the middle line everywhere
    band = np.array([[float(v) for v in p.split(",")]
                     for p in root.find(".//s:polygon[@class='band']", NS).get("points").split()])
    upper, lower = band[:80], band[80:][::-1]
    middle = np.array([[float(v) for v in p.split(",")]
                       for p in root.find(".//s:polyline[@class='middle']", NS).get("points").split()])
    assert np.all(upper[:, 1] <= middle[:, 1]) and np.all(middle[:, 1] <= lower[:, 1])
    assert np.allclose(to_y(middle[:, 1]), d.p50, atol=per_px_y)
    legend = [t.text for t in root.findall(".//s:text[@class='legend']", NS)]
    assert legend == ["80 % band", "straight path", "readings", "set aside", "limit", "today"]


def _boxes(root) -> list[tuple[float, float, float, float, str]]:
    """(x0, y0, x1, y1, text) of every text of a chart, from its anchor, font size and length
    (CHAR_EM per character, the bound the layout uses; the printed check measures real glyphs)."""
    out = []
    for t in root.iter(f"{{{NS['s']}}}text"):
        if t.get("transform"):  # the rotated axis label: left of the tick labels, checked below
            continue
        size = float(t.get("font-size") or root.get("font-size"))
        w = len(t.text) * size * CHAR_EM
        x, y = float(t.get("x")), float(t.get("y")) + float(t.get("dy") or 0)
        anchor = t.get("text-anchor") or "start"
        x0 = x - w / 2 if anchor == "middle" else x - w if anchor == "end" else x
        out.append((x0, y - 0.75 * size, x0 + w, y + 0.22 * size, t.text))
    return out


def _overlaps(boxes):
    return [(a[4], b[4]) for i, a in enumerate(boxes) for b in boxes[i + 1:]
            if a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]]


@pytest.mark.parametrize("seed", range(40))
def test_no_label_overlaps_another_or_leaves_the_chart(seed):
    # crossings days apart or years apart, the limit anywhere, spans from weeks to decades
    rng = random.Random(seed)
    span = rng.choice([40, 200, 720, 3000, 9000])
    gaps = sorted(rng.uniform(0.0, 0.3) * span for _ in range(3))
    start = D0 + 0.96 * span
    crossings = tuple(zip(("P10", "P50", "P90"), (start + g for g in gaps)))
    d = _data(limit=rng.uniform(0.0, 9.0), crossings=crossings, span_days=span,
              used=[rng.random() > 0.2 for _ in range(5)])
    root = ET.fromstring(chart_svg(d, "D-17093 (TQ-250, SH-102): case drain", f"c{seed}"))
    boxes = _boxes(root)
    assert not _overlaps(boxes)
    assert all(0 <= x0 and x1 <= WIDTH and 0 <= y0 and y1 <= HEIGHT for x0, y0, x1, y1, _ in boxes), boxes
    frame = root.find("s:rect[@class='frame']", NS)  # the plot's frame: the legend lies wholly below it
    bottom = float(frame.get("y")) + float(frame.get("height"))
    assert all(float(t.get("y")) - 8 > bottom for t in root.findall(".//s:text[@class='legend']", NS))
    assert len(root.findall(".//s:text[@class='crossing']", NS)) == 3


def test_same_data_same_bytes_and_ids_carry_the_prefix():
    a, b = chart_svg(_data(), "t", "c7"), chart_svg(_data(), "t", "c7")
    assert a == b
    ids = [e.get("id") for e in ET.fromstring(a).iter() if e.get("id")]
    assert ids and all(i.startswith("c7-") for i in ids)


def test_no_limit_and_endless_band_still_draw_inside_the_plot():
    d = _data(limit=None)
    wild = ChartData(**{**d.__dict__, "p90": np.full(80, np.inf), "crossings": ()})
    root = ET.fromstring(chart_svg(wild, "t", "c2"))
    assert root.find(".//s:line[@class='limit']", NS) is None
    assert root.find(".//s:polygon[@class='band']", NS) is None  # no finite upper edge: no band drawn
    to_y, per_px_y = _scale(root, "ytick", "y", lambda t: float(t.text))
    dots = root.findall(".//s:circle[@class='reading']", NS)
    assert np.allclose(to_y([float(c.get("cy")) for c in dots]), d.readings_y, atol=per_px_y)


@pytest.fixture(scope="module")
def forecasted():
    """(fleet, its forecast, today) of a small invented fleet, through the engine."""
    from logbook.analysis.fleet import forecast_fleet
    from tests.unit.test_forecast import TODAY, small_fleet

    fleet = small_fleet([4e-4, 6e-4, 9e-4, 5e-4, 2e-4])
    return fleet, forecast_fleet(fleet, TODAY), TODAY


@pytest.mark.slow
def test_bands_batched_across_charts_equal_the_bands_one_by_one(forecasted):
    # one call of the forecast's path mixture for every chart of a page gives each chart's own band
    from logbook.exports.charts import chart_data, charts_data

    _, forecast, today = forecasted
    kfs = [k for p in forecast.pumps for k in p.kinds] + [None]
    rates = [p.hours_per_day for p in forecast.pumps for _ in p.kinds] + [None]
    batched = charts_data(kfs, today, rates)
    assert sum(1 for d, kf in zip(batched, kfs) if d is not None and kf.fit.mixture is not None) >= 3
    for kf, rate, got in zip(kfs, rates, batched):
        alone = chart_data(kf, today, rate) if kf is not None else None
        assert (got is None) == (alone is None)
        if got is not None:
            for a, b in ((got.p10, alone.p10), (got.p50, alone.p50), (got.p90, alone.p90)):
                assert np.allclose(a, b, rtol=1e-9, atol=0, equal_nan=True)


@pytest.mark.slow
def test_chart_calendar_puts_readings_on_their_dates_and_the_median_at_the_p50_date(forecasted):
    from logbook.exports.charts import chart_data

    fleet, forecast, today = forecasted
    pump = forecast.pump("S1")
    kf = pump.kinds[0]
    d = chart_data(kf, today, pump.hours_per_day)
    taken = sorted(r.taken_on.toordinal() for r in fleet.readings if r.serial == "S1")
    assert sorted(d.readings_x.tolist()) == taken  # the days the readings were taken, as recorded
    assert d.now == today.toordinal()
    assert dict(d.crossings) == {"P10": kf.p10_date.toordinal(), "P50": kf.p50_date.toordinal(),
                                 "P90": kf.p90_date.toordinal()}
    # the median line meets the limit on the P50 date (to the day: dates are whole days)
    above = np.flatnonzero(d.p50 >= kf.limit.value)
    i = above[0]
    crossing_day = np.interp(kf.limit.value, d.p50[i - 1:i + 1], d.x[i - 1:i + 1])
    assert crossing_day == pytest.approx(kf.p50_date.toordinal(), abs=1.0)
    assert np.all(np.diff(d.x) > 0)


@pytest.mark.slow
def test_chart_values_in_us_units(forecasted):
    # Reference: scipy.constants (gallon, litre, minute; NIST SP 811): 1 US gal = 3.785411784 L
    from scipy import constants

    from logbook.exports.charts import chart_data

    _, forecast, today = forecasted
    pump = forecast.pump("S1")
    kf = pump.kinds[0]
    metric, us = chart_data(kf, today, pump.hours_per_day), chart_data(kf, today, pump.hours_per_day, "gpm")
    per = constants.litre / constants.gallon
    assert np.allclose(us.readings_y, metric.readings_y * per) and np.allclose(us.p50, metric.p50 * per)
    assert us.limit == pytest.approx(kf.limit.value * per) and us.y_label == "case drain [gpm]"
    assert np.array_equal(us.x, metric.x)


def _bars(root):
    return root.findall(".//s:rect[@class='bar']", NS)


def test_shop_load_bars_read_back_as_the_jobs_against_capacity():
    months = [f"2027-{m:02d}" for m in range(1, 13)]
    jobs = [3, 5, 0, 4, 5, 2, 1, 5, 3, 0, 2, 4]
    root = ET.fromstring(shop_load_svg(months, jobs, 5))
    to_y, per_px = _scale(root, "ytick", "y", lambda t: float(t.text))
    bars = _bars(root)
    assert [b.get("data-month") for b in bars] == months
    tops = to_y([float(b.get("y")) for b in bars])
    assert np.allclose(tops, jobs, atol=per_px)
    cap = root.find(".//s:line[@class='capacity']", NS)
    assert to_y(float(cap.get("y1"))) == pytest.approx(5.0, abs=per_px)
    assert [t.text for t in root.findall(".//s:text[@class='count']", NS)] == [str(j) for j in jobs]
    assert "capacity 5 a month" in [t.text for t in root.findall(".//s:text[@class='legend']", NS)]
    assert not _overlaps(_boxes(root))


@pytest.mark.parametrize("n", [1, 6, 24, 60])
def test_shop_load_labels_fit_at_any_horizon(n):
    months = [f"{2027 + k // 12}-{k % 12 + 1:02d}" for k in range(n)]
    root = ET.fromstring(shop_load_svg(months, [k % 7 for k in range(n)], None))
    boxes = _boxes(root)
    assert not _overlaps(boxes)
    assert all(0 <= x0 and x1 <= WIDTH and 0 <= y0 and y1 <= LOAD_HEIGHT for x0, y0, x1, y1, _ in boxes)
    assert root.find(".//s:line[@class='capacity']", NS) is None
    assert "no capacity limit set" in [t.text for t in root.findall(".//s:text[@class='legend']", NS)]
    labels = [t.text for t in root.findall(".//s:text[@class='xtick']", NS)]
    assert labels[0] == months[0] and len(labels) >= min(n, 6)


def test_a_month_over_capacity_is_drawn_apart():
    root = ET.fromstring(shop_load_svg(["2027-01", "2027-02"], [2, 4], 3))
    fills = [b.get("fill") for b in _bars(root)]
    assert fills[0] != fills[1]


def test_readings_days_known_even_when_a_pump_sat_idle():
    # a gap of a year without hours: the readings keep their own dates (not spread by hours)
    from logbook.exports.charts import hours_to_days

    rh = np.array([0.0, 1000.0, 1000.0, 2000.0])
    rd = np.array([0, 100, 465, 565], float) + D0
    got = hours_to_days(rh, rh, rd, 2000.0, int(D0 + 600), 10.0)
    assert got[0] == D0 and got[1] in (D0 + 100, D0 + 465) and np.all(np.diff(got) >= 0)
    future = hours_to_days(np.array([2500.0]), rh, rd, 2000.0, int(D0 + 600), 10.0)
    assert future[0] == pytest.approx(D0 + 650)  # 500 h at 10 h a day after today
    assert np.isnan(hours_to_days(np.array([2500.0]), rh, rd, 2000.0, int(D0 + 600), None)[0])
