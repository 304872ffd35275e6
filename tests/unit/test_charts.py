"""The direct SVG chart writer: ticks, geometry read back from the SVG, determinism."""

from __future__ import annotations

import random
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from logbook.exports.charts import ChartData, chart_svg, nice_ticks

NS = {"s": "http://www.w3.org/2000/svg"}


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


def _data(limit=8.0, used=None) -> ChartData:
    x = np.linspace(0.0, 12_000.0, 80)
    mid = 1.0 + 5e-4 * x
    rx = np.array([500.0, 2_000.0, 4_000.0, 6_500.0, 9_000.0])
    ry = 1.0 + 5e-4 * rx + np.array([0.1, -0.1, 0.05, 0.4, -0.05])
    used = np.ones(rx.size, bool) if used is None else np.asarray(used, bool)
    return ChartData(x=x, p10=mid - 0.6, p50=mid, p90=mid + 0.6, readings_x=rx, readings_y=ry, used=used,
                     limit=limit, now=9_500.0, crossings=(("P10", 11_000.0), ("P50", 11_500.0)),
                     y_label="case drain [L/min]", middle_label="straight path")


def _scale(root, cls, attr):
    """The linear map pixel -> value given by the tick labels the SVG prints (least squares)."""
    ticks = root.findall(f".//s:text[@class='{cls}']", NS)
    values = np.array([float(t.text) for t in ticks])
    pixels = np.array([float(t.get(attr)) for t in ticks])
    slope, intercept = np.polyfit(pixels, values, 1)
    return lambda p: slope * np.asarray(p, float) + intercept, abs(slope)


def test_marks_sit_at_their_values_read_back_through_the_printed_ticks():
    d = _data(used=[True, True, True, False, True])
    root = ET.fromstring(chart_svg(d, "P-1 <x> & y", "c1"))  # well-formed XML, title escaped
    assert root.find("s:title", NS).text == "P-1 <x> & y"
    to_x, per_px_x = _scale(root, "xtick", "x")
    to_y, per_px_y = _scale(root, "ytick", "y")
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
    assert to_x(float(now.get("x1"))) == pytest.approx(9_500.0, abs=per_px_x)
    # the band encloses the middle line everywhere
    band = np.array([[float(v) for v in p.split(",")]
                     for p in root.find(".//s:polygon[@class='band']", NS).get("points").split()])
    upper, lower = band[:80], band[80:][::-1]
    middle = np.array([[float(v) for v in p.split(",")]
                       for p in root.find(".//s:polyline[@class='middle']", NS).get("points").split()])
    assert np.all(upper[:, 1] <= middle[:, 1]) and np.all(middle[:, 1] <= lower[:, 1])
    assert np.allclose(to_y(middle[:, 1]), d.p50, atol=per_px_y)
    legend = [t.text for t in root.findall(".//s:text[@class='legend']", NS)]
    assert legend == ["80 % band", "straight path", "readings", "set aside", "limit"]


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
    to_y, per_px_y = _scale(root, "ytick", "y")
    dots = root.findall(".//s:circle[@class='reading']", NS)
    assert np.allclose(to_y([float(c.get("cy")) for c in dots]), d.readings_y, atol=per_px_y)


def test_bands_batched_across_charts_equal_the_bands_one_by_one():
    # one call of the forecast's path mixture for every chart of a page gives each chart's own band
    from logbook.analysis.fleet import forecast_fleet
    from logbook.exports.charts import chart_data, charts_data
    from tests.unit.test_forecast import TODAY, small_fleet

    forecast = forecast_fleet(small_fleet([4e-4, 6e-4, 9e-4, 5e-4, 2e-4]), TODAY)
    kfs = [k for p in forecast.pumps for k in p.kinds] + [None]
    batched = charts_data(kfs)
    assert sum(1 for d, kf in zip(batched, kfs) if d is not None and kf.fit.mixture is not None) >= 3
    for kf, got in zip(kfs, batched):
        alone = chart_data(kf) if kf is not None else None
        assert (got is None) == (alone is None)
        if got is not None:
            for a, b in ((got.p10, alone.p10), (got.p50, alone.p50), (got.p90, alone.p90)):
                assert np.allclose(a, b, rtol=1e-9, atol=0, equal_nan=True)
