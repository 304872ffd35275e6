"""Print check: the HTML plan (with charts) and a round sheet of the demo fleet printed to
PDF by headless Chromium on A4 and on US Letter, then read back word by word with
``pdftotext -bbox`` (poppler). It fails (exit 1) when

- a word lies outside its page (a table or chart clipped at the page edge),
- a serial, a date or an ISO 4406 code of the HTML is missing from the PDF as one word
  (broken at a hyphen across two lines, or clipped away),
- a section or machine heading is the last thing on its page (stranded from its content),
- two words overlap on a page (chart labels on top of each other: the glyph boxes Chromium
  printed, as ``pdftotext -bbox`` reads them back, intersect by more than a sliver).

It prints pages per paper size and, for the round sheet, pumps per page.

    python tests/bench/print_check.py [--keep DIR]

Needs the Debian packages chromium and poppler-utils (``apt-get install chromium
poppler-utils``); nothing is fetched from the network (the pages hold no external
resource, and Chromium runs with networking off). A check script rather than a test: CI
machines may not have Chromium. docs/printing.md says when to run it.
"""

from __future__ import annotations

import argparse
import html
import re
import shutil
import subprocess
import sys
import tempfile
from collections import Counter
from datetime import date
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

PAPERS = {"A4": "A4", "Letter": "letter"}
TODAY = date(2026, 12, 1)
TOKEN = re.compile(r"^(?:[A-Z]{1,3}-\d{3,}|\d{4}-\d{2}-\d{2}|\d{1,2}/\d{1,2}/\d{1,2})$")  # serial, date, ISO 4406
WORD = re.compile(r'<word xMin="([\d.]+)" yMin="([\d.]+)" xMax="([\d.]+)" yMax="([\d.]+)">(.*?)</word>')
PAGE = re.compile(r'<page width="([\d.]+)" height="([\d.]+)">(.*?)</page>', re.S)
PUNCT = ",;:()[]."


def chromium() -> str:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        if shutil.which(name):
            return name
    sys.exit("print_check: no chromium found (apt-get install chromium)")


def build(folder: Path) -> tuple[Path, Path]:
    import demo_fleet
    from logbook.cli import main
    from logbook.store import Store

    db = folder / "demo.db"
    with Store(db, create=True, user="demo") as store:
        demo_fleet.load(store, today=TODAY, seed=7)
        site = sorted({m.site for m in store.machines().values()})[0]
    plan, sheet = folder / "plan.html", folder / "round.html"
    base = ["--db", str(db), "--today", TODAY.isoformat()]
    assert main([*base, "forecast", "--out", str(plan), "--capacity", "3"]) == 0
    assert main([*base, "round", "--site", site, "--all", "--format", "html", "--out", str(sheet)]) == 0
    return plan, sheet


def to_pdf(page: Path, paper: str, out: Path) -> None:
    forced = page.with_name(f"{page.stem}-{paper}.html")
    forced.write_text(page.read_text().replace("</style>", f"@page {{ size: {PAPERS[paper]}; }}</style>", 1))
    subprocess.run([chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--no-pdf-header-footer",
                    "--proxy-server=127.0.0.1:9", "--proxy-bypass-list=<-loopback>", f"--print-to-pdf={out}",
                    forced.as_uri()], check=True, capture_output=True, timeout=180)


def pdf_pages(pdf: Path) -> list[tuple[float, float, list[tuple[float, float, float, float, str]]]]:
    text = subprocess.run(["pdftotext", "-bbox", str(pdf), "-"], check=True, capture_output=True, text=True).stdout
    return [(float(w), float(h), [(float(a), float(b), float(c), float(d), html.unescape(t))
                                  for a, b, c, d, t in WORD.findall(body)]) for w, h, body in PAGE.findall(text)]


def html_tokens(page: Path) -> Counter:
    body = page.read_text().split("<body>", 1)[1]
    body = re.sub(r"<svg.*?</svg>", " ", body, flags=re.S)  # chart labels are drawn, checked by their own tests
    words = html.unescape(re.sub(r"<[^>]+>", " ", body)).split()
    return Counter(w.strip(PUNCT) for w in words if TOKEN.match(w.strip(PUNCT)))


def headings(page: Path) -> list[str]:
    return [html.unescape(re.sub(r"<[^>]+>", "", h)) for h in re.findall(r"<h[23][^>]*>(.*?)</h[23]>", page.read_text())]


def overlapping(words, sliver: float = 0.6) -> list[tuple[str, str]]:
    """Pairs of words on one page whose boxes intersect by more than ``sliver`` pt both ways
    (neighbouring words of one line touch, they do not overlap)."""
    boxes = sorted(words)
    out = []
    for i, (x0, y0, x1, y1, text) in enumerate(boxes):
        for a0, b0, a1, b1, other in boxes[i + 1:]:
            if a0 >= x1 - sliver:
                break  # sorted by left edge: no later word reaches back into this one
            if min(x1, a1) - max(x0, a0) > sliver and min(y1, b1) - max(y0, b0) > sliver:
                out.append((text, other))
    return out


def check(page: Path, paper: str, folder: Path) -> tuple[list[str], int]:
    pdf = folder / f"{page.stem}-{paper}.pdf"
    to_pdf(page, paper, pdf)
    pages = pdf_pages(pdf)
    problems = []
    seen: Counter = Counter()
    for n, (width, height, words) in enumerate(pages, start=1):
        for x0, y0, x1, y1, text in words:
            if x0 < 0 or y0 < 0 or x1 > width + 0.5 or y1 > height + 0.5:
                problems.append(f"{paper} page {n}: {text!r} lies outside the page ({x1:.0f} > {width:.0f} pt)")
            seen[text.strip(PUNCT)] += 1
        lines = sorted({round(y0) for _, y0, _, _, _ in words})
        if lines:
            last = " ".join(t for _, y0, _, _, t in sorted(words, key=lambda w: w[0]) if round(y0) == lines[-1])
            for heading in headings(page):
                if " ".join(heading.split()) == last and n < len(pages):
                    problems.append(f"{paper} page {n}: heading {heading!r} is the last line of the page")
    problems += [f"{paper} page {n}: {a!r} and {b!r} overlap" for n, (_, _, words) in enumerate(pages, start=1)
                 for a, b in overlapping(words)]
    for token, count in html_tokens(page).items():
        if seen[token] < count:
            problems.append(f"{paper}: {token!r} shows {seen[token]} of {count} times whole in the PDF (broken or clipped)")
    return problems, len(pages)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--keep", type=Path, default=None, help="write the pages and PDFs here and keep them")
    args = parser.parse_args()
    folder = args.keep or Path(tempfile.mkdtemp(prefix="print-check-"))
    folder.mkdir(parents=True, exist_ok=True)
    plan, sheet = build(folder)
    pumps = sheet.read_text().count('class="pump"')
    failed = []
    for page in (plan, sheet):
        for paper in PAPERS:
            problems, count = check(page, paper, folder)
            extra = f", {pumps / count:.1f} pumps a page ({pumps} pumps)" if page is sheet else ""
            print(f"{page.name} on {paper}: {count} pages{extra}, {len(problems)} problem(s)")
            for p in problems[:20]:
                print(f"  - {p}")
            failed += problems
    if args.keep is None:
        shutil.rmtree(folder, ignore_errors=True)
    print("print check:", "FAILED" if failed else "ok")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
