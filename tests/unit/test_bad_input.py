"""Property tests: generated bad values never raise, always come back as a Problem
naming the field; the import's fast cell parsers agree with the reference path."""

from __future__ import annotations

import pytest

import bisect
from datetime import date, timedelta

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from logbook import meter, validate
from logbook.commands.record import parse_with_unit
from logbook.imports import COLUMNS, cell_parser, parse_cell
from logbook.model import Problem
from logbook.units import UnitPrefs

TODAY = date(2026, 1, 1)
CASES = settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# Cells as people and spreadsheets write them: numbers in many spellings, formulas,
# dates in other formats, units glued on, blanks, control characters, long text.
number_like = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(min_value=-10**30, max_value=10**30).map(str),
    st.decimals(allow_nan=False, allow_infinity=False, places=3).map(str),
    st.sampled_from(["", " ", "1,5", "1.2.3", "1e999", "-0", "0x1A", "1_000", "٣", "NaN", "inf", "=A1*2", "=SUM(B2:B9)",
                     "+3", "@x", "12 bar", "4.2gpm", "\t7\t", "01/06/2025", "2025-13-01", "2025-02-30", "20250601",
                     "2999-01-01", "1969-12-31", "S-100", "x" * 600, "line\nbreak", "nul\x00byte"]),
)
cell_text = st.one_of(number_like, st.text(max_size=60))
_OTHER_UNIT = {"bar": "psi", "C": "F", "L/min": "gpm"}


def _problem_ok(problem: Problem | None, name: str) -> bool:
    return problem is None or (isinstance(problem, Problem) and problem.field and str(problem) and problem.allowed)


@pytest.mark.slow
def test_every_import_cell_parser_agrees_with_the_reference_path():
    """cell_parser (fast path + memo) must give what parse_cell gives, value and message."""
    count = 0
    kinds = [(table, name, col) for table, cols in COLUMNS.items() for name, col in cols.items()]

    @CASES
    @given(st.sampled_from(kinds), st.integers(0, 2), st.lists(cell_text, min_size=1, max_size=4))
    def check(kind, unit_choice, cells):
        nonlocal count
        count += 1
        _table, name, col = kind
        unit = None
        if col.spec is not None and unit_choice:
            canonical = col.spec.quantity.canonical
            unit = canonical if unit_choice == 1 else _OTHER_UNIT.get(canonical)
        sink: list[Problem] = []
        fast = cell_parser(name, col, unit, TODAY, sink)
        for raw in cells + cells:  # twice: the second time through the memo
            value = fast(raw)
            ref_value, ref_problem = parse_cell(name, col, raw, unit, TODAY)
            got_problem = sink.pop() if sink else None
            assert sink == []
            assert (got_problem is None) == (ref_problem is None), (raw, got_problem, ref_problem)
            if ref_problem is None:
                assert value == ref_value, (raw, value, ref_value)  # NaN is never accepted
            else:
                assert str(got_problem) == str(ref_problem)
                assert _problem_ok(got_problem, name)

    check()
    print(f"cell parser cases: {count}")
    assert count >= 100


@pytest.mark.slow
def test_field_parsers_never_raise_and_name_the_field():
    count = 0
    specs = list(validate.READING_FIELDS.values()) + list(validate.MODEL_FIELDS.values()) + list(validate.HOURS_FIELDS.values())

    @CASES
    @given(st.sampled_from(specs), cell_text, st.integers(0, 2))
    def check(spec, raw, unit_choice):
        nonlocal count
        count += 1
        canonical = spec.quantity.canonical
        unit = None if unit_choice == 0 else canonical if unit_choice == 1 else _OTHER_UNIT.get(canonical)
        value, problem = validate.parse_number(spec, raw, unit)
        if problem is None:
            assert value is None or (spec.minimum - 1e-6 * max(1, abs(spec.maximum)) <= value
                                     <= spec.maximum + 1e-6 * max(1, abs(spec.maximum)))
        else:
            assert value is None and problem.field == spec.name and "must be" in problem.allowed
        for parsed in (validate.parse_date("date", raw, TODAY), validate.parse_name("serial", raw),
                       validate.parse_oil_grade(raw), validate.parse_iso4406(raw), validate.parse_event_kind(raw)):
            value, problem = parsed
            assert (value is None) or (problem is None)
            assert _problem_ok(problem, "")
        value, problem = validate.parse_date("date", raw, TODAY)
        if value is not None:
            assert validate.EARLIEST_DATE <= value <= TODAY

    check()
    print(f"field parser cases: {count}")
    assert count >= 100


@pytest.mark.slow
def test_record_command_values_never_raise():
    count = 0

    @CASES
    @given(st.sampled_from(sorted(validate.READING_FIELDS)), st.one_of(number_like, number_like.map(lambda t: t + "psi"),
                                                                      number_like.map(lambda t: t + " furlongs")),
           st.booleans())
    def check(name, text, us):
        nonlocal count
        count += 1
        value, problem = parse_with_unit(name, text, UnitPrefs.us() if us else UnitPrefs())
        assert (value is None) or (problem is None)
        if problem is not None:
            assert problem.field == name and problem.allowed

    check()
    print(f"record value cases: {count}")
    assert count >= 100


def _brute_neighbours(points, replacements, on):
    """The definition: within on's meter era, the highest-hours record dated before
    ``on`` (earliest such date) and the lowest-hours record dated after it."""
    era = bisect.bisect_right(sorted(replacements), on)
    same = sorted(p for p in points if bisect.bisect_right(sorted(replacements), p[0]) == era)
    before = [p for p in same if p[0] < on]
    after = [p for p in same if p[0] > on]
    earlier = min(before, key=lambda p: (-p[1], p[0])) if before else None
    later = min(after, key=lambda p: (p[1], p[0])) if after else None
    return earlier, later


@pytest.mark.slow
def test_meter_timeline_neighbours_match_their_definition():
    count = 0
    days = st.integers(min_value=0, max_value=60).map(lambda d: date(2025, 1, 1) + timedelta(days=d))

    @CASES
    @given(st.lists(st.tuples(days, st.integers(0, 50).map(float)), max_size=25), st.lists(days, max_size=3), days)
    def check(points, replacements, on):
        nonlocal count
        count += 1
        tl = meter.MeterTimeline(replacements)
        for d, h in points:
            tl.add(d, h)
        assert tl.neighbours(on) == _brute_neighbours(points, replacements, on)

    check()
    print(f"meter timeline cases: {count}")
    assert count >= 100
