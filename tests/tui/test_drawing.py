"""Pure parts of the interface: the braille canvas, the fleet table layout, trend words."""

from __future__ import annotations

from datetime import date

from logbook.analysis.results import KindForecast, Outcome, PumpForecast
from logbook.model import Kind, Limit
from logbook.tui import present
from logbook.tui.widgets.canvas import Canvas


def test_braille_dots_follow_the_unicode_numbering():
    # Unicode Standard, Braille Patterns block (U+2800-U+28FF): dot n sets bit n-1;
    # dots 1,2,3,7 are the left column top to bottom, 4,5,6,8 the right column.
    canvas = Canvas(1, 1, (0.0, 1.0), (0.0, 1.0))
    canvas._set_dot(0, 0, "fit", 1)  # top left: dot 1
    assert canvas.rows()[0][0][0] == "\u2801"
    canvas._set_dot(1, 3, "fit", 1)  # bottom right: dot 8
    assert canvas.rows()[0][0][0] == chr(0x2800 + 0x01 + 0x80)
    full = Canvas(1, 1, (0.0, 1.0), (0.0, 1.0))
    for col in range(2):
        for row in range(4):
            full._set_dot(col, row, "fit", 1)
    assert full.rows()[0][0][0] == "\u28ff"  # all eight dots


def test_marks_win_over_lines_and_lines_over_the_band():
    canvas = Canvas(10, 5, (0.0, 10.0), (0.0, 10.0))
    canvas.fill_between([i / 2 for i in range(20)], [0.0] * 20, [10.0] * 20, "░", "band", 1)
    canvas.path([i / 2 + 0.25 for i in range(20)], [5.0] * 20, "fit", 4)
    canvas.glyph(5.0, 5.0, "●", "point", 6)
    rows = canvas.rows()
    row_of_five = canvas.row_of(5.0)
    assert rows[row_of_five][5][0] == "●"
    assert 0x2800 < ord(rows[row_of_five][1][0]) <= 0x28FF
    assert rows[0][0] == ("░", "band")


def test_values_map_upward_and_off_canvas_values_are_dropped():
    canvas = Canvas(4, 4, (0.0, 4.0), (0.0, 4.0))
    assert canvas.row_of(3.9) == 0 and canvas.row_of(0.1) == 3
    assert canvas.col_of(0.1) == 0 and canvas.col_of(3.9) == 3
    assert canvas.row_of(5.0) is None and not canvas.glyph(1.0, -1.0, "x", "p", 1)


def test_fleet_layout_fits_the_width_and_adds_detail_when_wider():
    for width in (70, 78, 80, 100, 120, 160):
        cols = present.fleet_layout(width - 2)
        assert sum(c.width for c in cols) + len(cols) - 1 <= width - 2
    narrow = {c.key: c for c in present.fleet_layout(78)}
    wide = {c.key: c for c in present.fleet_layout(118)}
    assert "site" not in narrow and "site" in wide
    assert narrow["p10"].width == 7 and wide["p10"].width == 10  # YYYY-MM, then YYYY-MM-DD


def _kind(rate: float | None, limit: Limit | None) -> KindForecast:
    return KindForecast("S", Kind.SERVO_PRESSURE, limit, Outcome.CROSSING, 20.0, 20.0, date(2026, 1, 1), 5, None,
                        None, "linear", None, None, None, None, None, None, rate_per_1000h=rate)


def test_trend_words_say_whether_the_value_moves_toward_the_limit():
    below = Limit(Kind.SERVO_PRESSURE, 18.0, "below")
    assert present.trend(_kind(-1.0, below)) == ("↓", "toward limit")  # servo pressure falling: worse
    assert present.trend(_kind(1.0, below)) == ("↑", "away from limit")
    assert present.trend(_kind(0.1, below)) == ("→", "steady")  # under 1 % of the limit per 1000 h
    assert present.trend(_kind(None, below)) == ("·", "no trend")


def test_most_urgent_first_follows_the_engine_status_order():
    def pump(serial: str, status: str) -> PumpForecast:
        return PumpForecast(serial, "M", "X", "p", "site", 1.0, 1.0, (), worst=None, status=status)

    pumps = [pump("A", "✓ steady"), pump("B", "✖ over limit"), pump("C", "△ plan overhaul"), pump("D", "▲ overhaul due")]
    assert [p.serial for p in present.select_pumps(pumps)] == ["B", "D", "C", "A"]
    assert [p.serial for p in present.select_pumps(pumps, status="✓ steady")] == ["A"]
