"""A character canvas with braille dots for lines and whole glyphs for marks (pure).

Each cell is 2 dots wide and 4 high (Unicode braille patterns, U+2800). A cell
shows either braille dots or one glyph; the layer with the higher priority wins,
so points stay visible over the fitted path and the path over the band.
"""

from __future__ import annotations

import math

# Bit of each dot in a braille cell, indexed [row][column] (Unicode braille order).
_DOT_BITS = ((0x01, 0x08), (0x02, 0x10), (0x04, 0x20), (0x40, 0x80))
BRAILLE_BASE = 0x2800


class Canvas:
    """``width`` x ``height`` cells mapping data x/y ranges; y grows upward."""

    def __init__(self, width: int, height: int, x_range: tuple[float, float], y_range: tuple[float, float]):
        self.width = max(width, 1)
        self.height = max(height, 1)
        self.x0, self.x1 = x_range
        self.y0, self.y1 = y_range
        if self.x1 <= self.x0:
            self.x1 = self.x0 + 1.0
        if self.y1 <= self.y0:
            self.y1 = self.y0 + 1.0
        # Per cell: (priority, text, style name) or braille bits per style.
        self._glyphs: dict[tuple[int, int], tuple[int, str, str]] = {}
        self._dots: dict[tuple[int, int], tuple[int, int, str]] = {}  # cell -> (priority, bits, style)

    # -- coordinates ----------------------------------------------------------
    def col_of(self, x: float) -> int | None:
        if not math.isfinite(x) or x < self.x0 or x > self.x1:
            return None
        return min(int((x - self.x0) / (self.x1 - self.x0) * self.width), self.width - 1)

    def row_of(self, y: float) -> int | None:
        """Cell row (0 = top) holding value y, None when off the canvas."""
        if not math.isfinite(y) or y < self.y0 or y > self.y1:
            return None
        from_bottom = min(int((y - self.y0) / (self.y1 - self.y0) * self.height), self.height - 1)
        return self.height - 1 - from_bottom

    def x_of_col(self, col: float) -> float:
        """Data x at a (fractional) cell column."""
        return self.x0 + (col / self.width) * (self.x1 - self.x0)

    def dot_xs(self) -> list[float]:
        """Data x at the centre of every dot column, left to right."""
        return [self.x_of_col((i + 0.5) / 2) for i in range(self.width * 2)]

    # -- drawing ----------------------------------------------------------------
    def glyph(self, x: float, y: float, text: str, style: str, priority: int) -> bool:
        col, row = self.col_of(x), self.row_of(y)
        if col is None or row is None:
            return False
        self.glyph_at(col, row, text, style, priority)
        return True

    def glyph_at(self, col: int, row: int, text: str, style: str, priority: int) -> None:
        old = self._glyphs.get((col, row))
        if old is None or old[0] <= priority:
            self._glyphs[(col, row)] = (priority, text, style)

    def hline(self, y: float, text: str, style: str, priority: int) -> int | None:
        row = self.row_of(y)
        if row is not None:
            for col in range(self.width):
                self.glyph_at(col, row, text, style, priority)
        return row

    def vline(self, x: float, text: str, style: str, priority: int) -> int | None:
        col = self.col_of(x)
        if col is not None:
            for row in range(self.height):
                self.glyph_at(col, row, text, style, priority)
        return col

    def fill_between(self, xs, lows, highs, text: str, style: str, priority: int) -> None:
        """Shade every cell that the span ``lows``..``highs`` touches, per cell column
        (``xs`` are the dot columns: two per cell)."""
        step = (self.y1 - self.y0) / self.height
        for col in range(min(self.width, (len(xs) + 1) // 2)):
            pair = [i for i in (2 * col, 2 * col + 1) if i < len(xs)]
            los = [lows[i] for i in pair if math.isfinite(lows[i])]
            his = [highs[i] for i in pair if math.isfinite(highs[i])]
            if not los or not his:
                continue
            lo, hi = min(min(los), min(his)), max(max(los), max(his))
            for row in range(self.height):
                cell_top = self.y1 - row * step
                cell_bottom = cell_top - step
                if hi >= cell_bottom and lo <= cell_top:
                    self.glyph_at(col, row, text, style, priority)

    def path(self, xs, ys, style: str, priority: int) -> None:
        """A braille line through (xs[i], ys[i]) at dot resolution, joined vertically."""
        previous = None
        for i, (x, y) in enumerate(zip(xs, ys)):
            if not (math.isfinite(x) and math.isfinite(y)):
                previous = None
                continue
            dot_col = i if len(xs) == self.width * 2 else int((x - self.x0) / (self.x1 - self.x0) * self.width * 2)
            dot_row = self._dot_row(y)
            if dot_row is None:
                previous = None
                continue
            rows = [dot_row]
            if previous is not None and abs(previous - dot_row) > 1:
                step = 1 if dot_row > previous else -1
                rows = list(range(previous + step, dot_row + step, step))
            for r in rows:
                self._set_dot(dot_col, r, style, priority)
            previous = dot_row

    def _dot_row(self, y: float) -> int | None:
        total = self.height * 4
        if not math.isfinite(y) or y < self.y0 or y > self.y1:
            return None
        from_bottom = min(int((y - self.y0) / (self.y1 - self.y0) * total), total - 1)
        return total - 1 - from_bottom

    def _set_dot(self, dot_col: int, dot_row: int, style: str, priority: int) -> None:
        if not (0 <= dot_col < self.width * 2 and 0 <= dot_row < self.height * 4):
            return
        cell = (dot_col // 2, dot_row // 4)
        bit = _DOT_BITS[dot_row % 4][dot_col % 2]
        old = self._dots.get(cell)
        bits = (old[1] if old else 0) | bit
        self._dots[cell] = (max(priority, old[0] if old else priority), bits, style)

    # -- output -----------------------------------------------------------------
    def rows(self) -> list[list[tuple[str, str]]]:
        """Rows of (character, style name) cells, top row first."""
        out = []
        for row in range(self.height):
            line = []
            for col in range(self.width):
                glyph = self._glyphs.get((col, row))
                dots = self._dots.get((col, row))
                if dots is not None and (glyph is None or dots[0] > glyph[0]):
                    line.append((chr(BRAILLE_BASE + dots[1]), dots[2]))
                elif glyph is not None:
                    line.append((glyph[1], glyph[2]))
                else:
                    line.append((" ", ""))
            out.append(line)
        return out
