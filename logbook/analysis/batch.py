"""Padded (S, N) arrays of trend series and the row-wise least-squares kernels on them.

One row is one (pump, reading kind) series: x = operating hours since the segment
start, y = normalized value, NaN where there is no reading. Everything here works on
whole arrays at once so that a fleet is fitted without a Python loop per pump.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

RISING, FALLING = 1, -1  # direction: toward an upper limit / toward a lower limit


@dataclass
class TrendBatch:
    """S series padded to N readings: valid readings left-aligned in x order, NaN after.

    ``limit`` NaN means no limit; ``direction`` is +1 (rises toward an upper limit) or
    -1 (falls toward a lower one); ``group`` is the pooling group (pump model x kind),
    -1 for none; ``x_now`` is hours since the segment start today.
    """

    x: np.ndarray  # (S, N) hours since segment start
    y: np.ndarray  # (S, N) normalized values
    limit: np.ndarray  # (S,)
    direction: np.ndarray  # (S,)
    group: np.ndarray  # (S,) int
    x_now: np.ndarray  # (S,)

    def __post_init__(self) -> None:
        self.x = np.asarray(self.x, dtype=float)
        self.y = np.asarray(self.y, dtype=float)
        if self.x.ndim != 2 or self.x.shape != self.y.shape:
            raise ValueError(f"x, y shapes = {self.x.shape}, {self.y.shape}: must be the same (S, N)")
        s = self.x.shape[0]
        self.limit = np.broadcast_to(np.asarray(self.limit, dtype=float), (s,))
        self.direction = np.broadcast_to(np.asarray(self.direction, dtype=np.int8), (s,))
        self.group = np.broadcast_to(np.asarray(self.group, dtype=np.int64), (s,))
        self.x_now = np.broadcast_to(np.asarray(self.x_now, dtype=float), (s,))

    @property
    def size(self) -> int:
        return self.x.shape[0]

    @classmethod
    def pack(
        cls,
        series: Sequence[tuple[Sequence[float], Sequence[float]]],
        limit: Sequence[float],
        direction: Sequence[int],
        group: Sequence[int] | None = None,
        x_now: Sequence[float] | None = None,
        width: int | None = None,
    ) -> "TrendBatch":
        """A batch of a list of (x_hours, y_values) pairs, padded by ``pad_rows``; ``x_now`` defaults to each
        row's last x."""
        lengths = [len(xs) for xs, _ in series]
        row = np.repeat(np.arange(len(series)), lengths)
        x = np.concatenate([np.asarray(xs, dtype=float) for xs, _ in series] + [np.zeros(0)])
        y = np.concatenate([np.asarray(ys, dtype=float) for _, ys in series] + [np.zeros(0)])
        position = np.arange(len(row)) - np.repeat(np.cumsum([0, *lengths[:-1]]), lengths).astype(np.int64)
        bx, by, _, kept = pad_rows(row, x, y, len(series), position, width)
        last = np.where(kept > 0, bx[np.arange(len(series)), np.maximum(np.minimum(kept, bx.shape[1]) - 1, 0)], 0.0)
        grp = np.full(len(series), -1) if group is None else np.asarray(group, dtype=np.int64)
        return cls(x=bx, y=by, limit=np.asarray(limit, dtype=float), direction=np.asarray(direction, dtype=np.int8), group=grp,
                   x_now=last if x_now is None else np.asarray(x_now, dtype=float))  # fmt: skip


def in_order(group: np.ndarray, *keys: np.ndarray) -> np.ndarray:
    """Stable order by ``group``, then by ``keys`` (most significant first), cheap when already in key order."""
    order = np.argsort(group, kind="stable")
    g = group[order]
    same = g[1:] == g[:-1]
    ok, tie = np.ones(len(same), dtype=bool), same
    for key in keys:
        k = key[order]
        ok &= ~tie | (k[1:] >= k[:-1])
        tie = tie & (k[1:] == k[:-1])
    if ok.all():
        return order
    return np.lexsort(tuple(reversed(keys)) + (group,))


def pad_rows(row: np.ndarray, x: np.ndarray, y: np.ndarray, rows: int, tiebreak: np.ndarray, width: int | None = None):
    """Points (row, x, y) as padded (rows, width) arrays: each row's finite points left-aligned in x order
    (ties by ``tiebreak``), NaN after; with ``width`` the newest ``width`` of a row kept. The width defaults
    to the most points of a row. Returns (x, y, rank of each point among its row's points in x order,
    finite points per row)."""
    order = in_order(row, x, tiebreak)
    per_row = np.bincount(row, minlength=rows)
    rank = np.empty(len(row), dtype=np.int64)
    rank[order] = np.arange(len(row)) - np.r_[0, np.cumsum(per_row)][row[order]]
    fine = np.isfinite(x) & np.isfinite(y)
    col, kept = rank, per_row
    if not fine.all():
        sub = order[fine[order]]
        kept = np.bincount(row[sub], minlength=rows)
        col = np.full(len(row), -1, dtype=np.int64)
        col[sub] = np.arange(len(sub)) - np.r_[0, np.cumsum(kept)][row[sub]]
    if width is None:
        width = max(int(per_row.max(initial=0)), 1)
    else:
        col = col - np.maximum(kept - width, 0)[row]  # drop the oldest beyond the width
        fine &= col >= 0
    bx, by = np.full((rows, width), np.nan), np.full((rows, width), np.nan)
    bx[row[fine], col[fine]] = x[fine]
    by[row[fine], col[fine]] = y[fine]
    return bx, by, rank, kept


@dataclass
class LineStats:
    """Row-wise weighted least-squares line y = a + b x (weights 0/1)."""

    n: np.ndarray
    xbar: np.ndarray
    ybar: np.ndarray
    sxx: np.ndarray
    a: np.ndarray
    b: np.ndarray
    rss: np.ndarray
    dx: np.ndarray | None = None  # (S, N) centred x, 0 where unused
    r: np.ndarray | None = None  # (S, N) residuals, 0 where unused

    def kept(self) -> tuple[np.ndarray, np.ndarray]:
        """(dx, r): the centred hours and the residuals, which ``ols_rows(..., keep=True)`` keeps."""
        if self.dx is None or self.r is None:
            raise ValueError("LineStats without dx and r: fitted with keep=False")
        return self.dx, self.r

    def put(self, rows: np.ndarray, other: "LineStats") -> None:
        """Overwrite ``rows`` with a refit of those rows."""
        for name in ("n", "xbar", "ybar", "sxx", "a", "b", "rss", "dx", "r"):
            mine = getattr(self, name)
            if mine is not None:
                mine[rows] = getattr(other, name)


def _rowdot(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    return np.einsum("ij,ij->i", u, v)


def ols_rows(x: np.ndarray, y: np.ndarray, w: np.ndarray, keep: bool = True) -> LineStats:
    """Least-squares line per row through the points with weight 1 (two-pass, centred: keeps digits).

    ``x`` and ``y`` must be finite everywhere (put 0 where ``w`` is 0).
    """
    with np.errstate(invalid="ignore", divide="ignore"):
        n = np.einsum("ij->i", w)
        nn = np.where(n > 0, n, 1.0)
        xbar = _rowdot(x, w) / nn
        ybar = _rowdot(y, w) / nn
        dx = x - xbar[:, None]
        dx *= w
        dy = y - ybar[:, None]
        dy *= w
        sxx = _rowdot(dx, dx)
        b = np.where(sxx > 0, _rowdot(dx, dy) / np.where(sxx > 0, sxx, 1.0), np.nan)
        a = ybar - b * xbar
        r = dx * np.nan_to_num(b)[:, None]
        np.subtract(dy, r, out=r)
        rss = _rowdot(r, r)
    return LineStats(n, xbar, ybar, sxx, a, b, rss, dx if keep else None, r if keep else None)


def ols_line(x_values: Sequence[float], y_values: Sequence[float]) -> dict[str, float]:
    """One straight line by the batch kernel: intercept, slope, their standard errors, residual sd, R^2."""
    x = np.asarray(x_values, dtype=float)[None, :]
    y = np.asarray(y_values, dtype=float)[None, :]
    st = ols_rows(x, y, np.ones_like(x))
    n, dof = float(st.n[0]), float(st.n[0]) - 2
    s2 = st.rss[0] / dof
    syy = float(_rowdot(y - st.ybar[:, None], y - st.ybar[:, None])[0])
    return {
        "intercept": float(st.a[0]),
        "slope": float(st.b[0]),
        "se_intercept": float(np.sqrt(s2 * (1.0 / n + st.xbar[0] ** 2 / st.sxx[0]))),
        "se_slope": float(np.sqrt(s2 / st.sxx[0])),
        "sigma": float(np.sqrt(s2)),
        "rss": float(st.rss[0]),
        "r2": 1.0 - float(st.rss[0]) / syy,
        "dof": dof,
    }
