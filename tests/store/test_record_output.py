"""What `record` prints after saving a reading: its own figures, never another reading's."""

from __future__ import annotations

from logbook.cli import main

TODAY = "2026-12-01"


def test_a_reading_left_out_of_the_trend_is_not_shown_with_the_previous_normalized_value(tmp_path, capsys):
    # A case drain at -30 C is kept (with --confirm) but not normalized: the oil's viscosity there is
    # far outside the range normalization is trusted over. `record` printed the trend's newest value
    # as "normalized", which was the previous reading's. It must say the reading is not used, and why.
    db = tmp_path / "d.db"
    assert main(["demo", "--no-ui", "--db", str(db), "--today", TODAY]) == 0
    capsys.readouterr()
    args = ["--db", str(db), "--today", TODAY, "record", "B-25530", "--date", "2026-11-30", "--hours", "20400",
            "--case-drain", "2.1", "--servo-pressure", "19.5", "--neutral-drift", "-2.0", "--oil-temp"]
    assert main(args + ["-30", "--test-pressure", "380", "--test-speed", "1800", "--confirm"]) == 0
    drain = _line(capsys.readouterr().out, "case drain:")
    assert "not used in the trend" in drain and "normalization is trusted" in drain
    assert "; normalized" not in drain
    # a reading at the test temperature is normalized: its line gives the value, not "not used"
    assert main(args + ["50", "--test-pressure", "380", "--test-speed", "1800", "--date", "2026-12-01",
                        "--hours", "20420", "--confirm"]) == 0
    drain = _line(capsys.readouterr().out, "case drain:")
    assert "; normalized" in drain and "not used" not in drain


def _line(out: str, start: str) -> str:
    """One kind's line of the output, the console's wrapping undone."""
    text = " ".join(out.split())
    return text.split(start, 1)[1].split(" servo pressure:", 1)[0]
