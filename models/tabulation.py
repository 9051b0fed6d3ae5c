"""Response curves tabulated per asset: evaluate a model on a grid of loads, then interpolate each interval.

Every machine model of :mod:`models.operation` is, for one asset and one option, a function of the
interval's reference shaft load alone (the asset's constants fixed). Over a year of intervals the same
curve is evaluated thousands of times, so it is cheaper to evaluate it once on a grid spanning the
asset's running loads and interpolate linearly between the grid's nodes. The grid is uniform in the
cube root of the load, so it is finer at light load, where a drive's speed follows the cube root of the
power on the affinity laws. The model is also evaluated at every cell's midpoint; the difference there
between the model and the interpolation measures the interpolation error of the row, and a row whose
error exceeds the caller's tolerance is evaluated interval by interval instead.

Yearly sums of a tabulated quantity need no per-interval array: with the hours of each cell and their
position-weighted hours, the sum is one product per cell (:func:`weighted_sums`).

Placing the intervals and interpolating them are single passes compiled by numba [1] (no temporary
arrays, the interpreter lock released so site threads run side by side); they do the same floating-point
operations in the same order as the plain numpy expressions in their docstrings, so the values are those.

References
----------
.. [1] S. K. Lam, A. Pitrou and S. Seibert, "Numba: a LLVM-based Python JIT compiler," in *Proc. Second
   Workshop on the LLVM Compiler Infrastructure in HPC*, 2015, pp. 1-6.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba
import numpy as np

#: The grid variable is the load to this power: 1/3 makes the grid uniform in the speed of a cube-law
#: load on a drive.
GRID_POWER = 1.0 / 3.0

@dataclass(frozen=True)
class Grid:
    """Where each interval of a group of assets falls on their grids.

    Attributes
    ----------
    p_grid_kw : numpy.ndarray, shape (n_assets, 2 n_nodes - 1)
        The loads to evaluate the model at: node j in column 2 j, the midpoint of cell j in column 2 j + 1 [kW].
    cell : numpy.ndarray of uint8 (int32 above 256 nodes), shape (n_assets, n_steps)
        Each interval's cell in its row's table of n_nodes entries: j in 0 .. n_nodes - 2, or the last
        entry (a zero cell) where the asset does not run.
    position_frac : numpy.ndarray, shape (n_assets, n_steps)
        Position of the interval's load within its cell, 0 at the lower node and 1 at the upper [-].
    hours_h, moment_h : numpy.ndarray, shape (n_assets, n_nodes)
        Per cell: the hours of its intervals, and those hours each times its position [h] (zero cell last).
    position_finite : numpy.ndarray of bool, shape (n_assets,), optional
        Whether every position of the row is finite (noted while placing; None: not known, to be checked).
    u_span : tuple of two numpy.ndarray, shape (n_assets,) each, optional
        Each row's smallest and largest grid variable u = p^(1/3) (set by :func:`locate`; what
        :func:`refine` needs).
    """

    p_grid_kw: np.ndarray
    cell: np.ndarray
    position_frac: np.ndarray
    hours_h: np.ndarray
    moment_h: np.ndarray
    position_finite: np.ndarray | None = None
    u_span: tuple[np.ndarray, np.ndarray] | None = None

    @property
    def n_nodes(self) -> int:
        return self.hours_h.shape[1]


def locate(p_kw: np.ndarray, running: np.ndarray, interval_h: float, n_nodes: int) -> Grid:
    """Lay a grid over each asset's running loads and place every interval on it.

    Parameters
    ----------
    p_kw : numpy.ndarray, shape (n_assets, n_steps)
        Reference shaft load per interval [kW], >= 0.
    running : numpy.ndarray of bool, shape (n_assets, n_steps)
        Where the asset runs (the model's value is 0 elsewhere).
    interval_h : float
        Hours each interval stands for [h].
    n_nodes : int
        Grid nodes per asset, >= 2.

    Returns
    -------
    Grid

    Notes
    -----
    With u = p^(1/3), the nodes of a row are u_j = u_lo + j (u_hi - u_lo) / (n_nodes - 1) between the
    row's smallest and largest running load. An interval at u falls in cell j = floor((u - u_lo) / h),
    capped at n_nodes - 2, at position (u - u_lo) / h - j. A row whose load never changes has every
    interval at its first node.

    Examples
    --------
    >>> g = locate(np.array([[0.0, 1.0, 8.0]]), np.array([[False, True, True]]), 1.0, 3)
    >>> g.p_grid_kw.round(6).tolist()
    [[1.0, 1.953125, 3.375, 5.359375, 8.0]]
    >>> g.cell.tolist(), g.position_frac.tolist()
    ([[2, 0, 1]], [[0.0, 0.0, 1.0]])
    """
    if n_nodes < 2:
        raise ValueError("a grid needs at least two nodes")
    n, m = p_kw.shape
    p_kw = np.ascontiguousarray(p_kw, dtype=float)
    running = np.ascontiguousarray(running, dtype=bool)
    cell = np.empty((n, m), dtype=np.uint8 if n_nodes <= 256 else np.int32)
    position = np.empty((n, m))
    count = np.zeros((n, n_nodes))
    moment = np.zeros((n, n_nodes))
    u_lo, u_hi = np.empty(n), np.empty(n)
    finite = np.empty(n, dtype=bool)
    # u = cbrt(p) row by row into a scratch row that stays in cache while the same pass places the row
    _locate_rows(p_kw, running, n_nodes, u_lo, u_hi, cell, position, count, moment, finite, np.empty(m))
    return _grid(u_lo, u_hi, cell, position, count, moment, finite, interval_h)


def _grid(u_lo, u_hi, cell, position, count, moment, finite, interval_h: float) -> Grid:
    """The :class:`Grid` of placed rows: nodes from each row's span, hours and moments from the counts."""
    n_nodes = count.shape[1]
    cols = np.arange(2 * n_nodes - 1) / 2.0
    with np.errstate(invalid="ignore", over="ignore"):  # (a row with an infinite load gets NaN nodes)
        step = (u_hi - u_lo) / (n_nodes - 1)
        u_grid = u_lo[:, None] + cols[None, :] * step[:, None]
        u_grid[:, -1] = u_hi  # the last node is the largest load itself
        p_grid = u_grid * u_grid * u_grid  # (a product, 4x as fast as the power; within an ulp of it)
    hours = count * float(interval_h)
    moment *= float(interval_h)
    hours[:, -1] = 0.0
    return Grid(p_grid, cell, position, hours, moment, finite, (u_lo, u_hi))


def refine(grid: Grid, rows: np.ndarray, factor: int, interval_h: float) -> Grid | None:
    """The grid of ``factor`` x as many cells for some rows of a grid, from its placing alone.

    Parameters
    ----------
    grid : Grid
        A grid made by :func:`locate`.
    rows : numpy.ndarray of int
        Its rows to refine.
    factor : int
        Cells of the new grid per cell of ``grid``, a power of 2.
    interval_h : float
        Hours each interval stands for [h] (as given to :func:`locate`).

    Returns
    -------
    Grid or None
        ``locate(p[rows], running[rows], interval_h, factor (n_nodes - 1) + 1)`` bit for bit, without a
        cube root or a pass over the loads; None where it cannot be had so (a row with a load that is
        not finite, a grid without its spans, or a factor that is not a power of 2).

    Notes
    -----
    The new width is the old one over ``factor``, a power of 2, so both divisions are exact scalings:
    the new coordinate is x' = factor (j + position) exactly (j + position = x exactly, the position
    being x - j with no rounding), and its cell and position follow as :func:`locate` takes them.
    """
    rows = np.asarray(rows, dtype=np.intp)
    if (grid.u_span is None or grid.position_finite is None or factor < 1 or factor & (factor - 1)
            or not grid.position_finite[rows].all()):
        return None
    n_nodes = factor * (grid.n_nodes - 1) + 1
    m = grid.cell.shape[1]
    cell = np.empty((len(rows), m), dtype=np.uint8 if n_nodes <= 256 else np.int32)
    position = np.empty((len(rows), m))
    count = np.zeros((len(rows), n_nodes))
    moment = np.zeros((len(rows), n_nodes))
    _refine_rows(grid.cell, grid.position_frac, rows, grid.n_nodes, factor, cell, position, count, moment)
    return _grid(grid.u_span[0][rows], grid.u_span[1][rows], cell, position, count, moment,
                 np.ones(len(rows), dtype=bool), interval_h)


@numba.njit(nogil=True, cache=True)
def _refine_rows(cell_in, position_in, rows, n_in, factor, cell, position, count, moment):  # pragma: no cover - compiled
    """:func:`refine`'s pass: each interval's coordinate scaled and placed as :func:`_locate_rows` places it."""
    top_in = n_in - 1
    n_nodes = factor * top_in + 1
    top = n_nodes - 1
    for k in range(rows.shape[0]):
        i = rows[k]
        for t in range(cell_in.shape[1]):
            j_in = cell_in[i, t]
            if j_in == top_in:  # not running: the zero cell
                cell[k, t] = top
                position[k, t] = 0.0
            else:
                x = (j_in + position_in[i, t]) * factor
                x = min(max(x, 0.0), float(top))
                j = min(int(x), n_nodes - 2)
                cell[k, t] = j
                position[k, t] = x - j
        _sum_cells(cell[k], position[k], top, count[k], moment[k])


#: Added to a positive float64's bits divided by 3: the bits of a first guess of its cube root within
#: about 4 % (the exponent divided by 3; the constant centres the mantissa's error).
_CBRT_GUESS_BITS = np.uint64(0x2A9F7893782DA1CE)


@numba.njit(nogil=True, cache=True, error_model="numpy")
def cube_root_row(p, out):  # pragma: no cover - compiled
    """``out[:] = numpy.cbrt(p)`` for a contiguous float64 row, within 4 units in the last place.

    A first guess from the bits of each positive normal value (its exponent divided by 3), then three
    Halley steps y <- y (y^3 + 2 p) / (2 y^3 + p), which triple the correct digits each (4e-2, 1e-5,
    1e-15, then rounding); zero, negative, tiny (below 1e-200), huge (above 1e200) and non-finite values
    take ``numpy.cbrt`` itself. About 4x as fast as ``numpy.cbrt``, whose libm call is exact to the last
    place but was the slowest step of placing a year of loads.

    References
    ----------
    .. [1] W. Kahan, "Computing a real cube root," unpublished notes, University of California, Berkeley,
       1991 (the first guess from the exponent's bits).
    .. [2] J. F. Traub, *Iterative Methods for the Solution of Equations*. Englewood Cliffs, NJ:
       Prentice-Hall, 1964 (Halley's method, third order; cited from memory).
    """
    guess = out.view(np.uint64)
    for t in range(p.shape[0]):  # values out of range take 1 here (a zero would make the steps subnormal, slow)
        x = p[t]
        out[t] = x if 1e-200 < x < 1e200 else 1.0  # (y (y^3 + 2 p) stays finite)
    for t in range(p.shape[0]):
        guess[t] = guess[t] // np.uint64(3) + _CBRT_GUESS_BITS
    for t in range(p.shape[0]):  # (no branch: the loop runs on vector registers)
        x = p[t]
        x = x if 1e-200 < x < 1e200 else 1.0
        y = out[t]
        y3 = y * y * y
        y = y * (y3 + 2.0 * x) / (2.0 * y3 + x)
        y3 = y * y * y
        y = y * (y3 + 2.0 * x) / (2.0 * y3 + x)
        y3 = y * y * y
        out[t] = y - (y3 - x) * y / (2.0 * y3 + x)
    for t in range(p.shape[0]):
        x = p[t]
        if not 1e-200 < x < 1e200:
            out[t] = np.cbrt(x)


@numba.njit(nogil=True, cache=True)
def _locate_rows(p, running, n_nodes, u_lo, u_hi, cell, position, count, moment, finite, scratch):  # pragma: no cover - compiled
    """:func:`locate`'s placing of every row of ``p``: u = cbrt(p) (:func:`cube_root_row`) into the
    scratch row, the row's span, then every interval's cell.

    Per row, as the numpy expressions would: u_lo, u_hi the smallest and largest u where running (0 and 0
    for a row that never runs); safe = (u_hi - u_lo) / (n_nodes - 1), or 1 where that is not > 0. Per running
    interval x = clip((u - u_lo) / safe, 0, n_nodes - 1), j = min(int(x), n_nodes - 2), position
    x - j; elsewhere the zero cell (last) at position 0. Counts and positions are summed interval by
    interval in order, as ``numpy.bincount`` does.
    """
    n, m = p.shape
    u = scratch
    top = n_nodes - 1
    for i in range(n):
        cube_root_row(p[i], u)
        lo, hi = np.inf, -np.inf
        for t in range(m):
            if running[i, t]:
                v = u[t]
                lo = min(lo, v)
                hi = max(hi, v)
        if not np.isfinite(lo):
            lo, hi = 0.0, 0.0
        u_lo[i], u_hi[i] = lo, hi
        width = (hi - lo) / (n_nodes - 1)
        if not width > 0.0:
            width = 1.0
        # every interval's cell and position, without a branch (the loop runs on vector registers); an
        # infinite load has no cell to be placed in: the zero cell at position NaN, the row not finite
        bad = 0
        for t in range(m):
            run = running[i, t]
            x = (u[t] - lo) / width
            good = x - x == 0.0  # (finite)
            bad += run and not good
            x = min(max(x if good else 0.0, 0.0), float(top))
            j = min(int(x), n_nodes - 2)
            cell[i, t] = j if (run and good) else top
            position[i, t] = (x - j) if (run and good) else (np.nan if run else 0.0)
        _sum_cells(cell[i], position[i], top, count[i], moment[i])
        finite[i] = bad == 0


@numba.njit(inline="always")
def _sum_cells(cell, position, top, count, moment):  # pragma: no cover - compiled
    """A placed row's hours (counted) and moments per cell, interval by interval in order, as
    ``numpy.bincount`` sums them; the zero cell ``top`` gets counts only."""
    for t in range(cell.shape[0]):
        j = cell[t]
        count[j] += 1.0
        if j != top:
            moment[j] += position[t]


def tables(values_on_grid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each cell's value at its lower node and its rise to the upper node, with a zero cell last.

    Parameters
    ----------
    values_on_grid : numpy.ndarray, shape (n_assets, 2 n_nodes - 1)
        The model's values at :attr:`Grid.p_grid_kw`.

    Returns
    -------
    base, rise : numpy.ndarray, shape (n_assets, n_nodes)
    """
    values = np.asarray(values_on_grid, dtype=float)
    n_nodes = (values.shape[1] + 1) // 2
    base = np.empty((values.shape[0], n_nodes))
    rise = np.empty((values.shape[0], n_nodes))
    _tables(values, base, rise)
    return base, rise


@numba.njit(nogil=True, cache=True)
def _tables(values, base, rise):  # pragma: no cover - compiled
    """:func:`tables` in one pass: base_j = v_2j, rise_j = v_2j+2 - v_2j; the last cell zero."""
    n, n_nodes = base.shape
    for i in range(n):
        for j in range(n_nodes - 1):
            a = values[i, 2 * j]
            base[i, j] = a
            rise[i, j] = values[i, 2 * j + 2] - a
        base[i, n_nodes - 1] = 0.0
        rise[i, n_nodes - 1] = 0.0


def midpoint_error(values_on_grid: np.ndarray) -> np.ndarray:
    """Largest |model - interpolation| at the cells' midpoints, per row (n_assets,) [unit of the values].

    Notes
    -----
    For a curve with a bounded second derivative f'' the linear interpolation's error is largest at a
    cell's midpoint, h^2 |f''| / 8; for a kink inside a cell it is at most twice its midpoint value.

    Examples
    --------
    >>> midpoint_error(np.array([[0.0, 0.25, 1.0, 2.25, 4.0]])).tolist()   # x^2 on nodes 0, 1, 2
    [0.25]
    """
    values = np.asarray(values_on_grid, dtype=float)
    out = np.zeros(values.shape[0])
    if values.shape[1] >= 3:
        _midpoint_error(values, out)
    return out


def cell_errors(values_on_grid: np.ndarray) -> np.ndarray:
    """|model - interpolation| at each cell's midpoint (n_assets, n_nodes - 1) [unit of the values]: the
    cell-by-cell form of :func:`midpoint_error` (its row maximum), NaN where a value is NaN.

    Examples
    --------
    >>> cell_errors(np.array([[0.0, 0.25, 1.0, 2.25, 4.0]])).tolist()   # x^2 on nodes 0, 1, 2
    [[0.25, 0.25]]
    """
    values = np.asarray(values_on_grid, dtype=float)
    return np.abs(values[:, 1::2] - 0.5 * (values[:, 0:-1:2] + values[:, 2::2]))


@numba.njit(nogil=True, cache=True)
def _midpoint_error(values, out):  # pragma: no cover - compiled
    """:func:`midpoint_error` in one pass: max_j |v_2j+1 - 0.5 (v_2j + v_2j+2)| per row (NaN if any is NaN,
    as numpy's max)."""
    n, m = values.shape
    for i in range(n):
        worst = 0.0
        for j in range((m - 1) // 2):
            e = abs(values[i, 2 * j + 1] - 0.5 * (values[i, 2 * j] + values[i, 2 * j + 2]))
            if e > worst or e != e:
                worst = e
            if worst != worst:
                break
        out[i] = worst


def interpolate(grid: Grid, base: np.ndarray, rise: np.ndarray, out: np.ndarray | None = None,
                rows: np.ndarray | None = None) -> np.ndarray:
    """The interpolated value in every interval (n, n_steps), 0 where the asset does not run.

    ``rows`` picks rows of the grid (their tables ``base``, ``rise`` of shape (len(rows), n_nodes));
    ``out`` receives the result. Each value is ``base[i, j] + rise[i, j] * position`` of its interval's
    cell j.
    """
    n = grid.cell.shape[0] if rows is None else len(rows)
    rows = np.arange(n, dtype=np.intp) if rows is None else np.asarray(rows, dtype=np.intp)
    out = np.empty((n, grid.cell.shape[1])) if out is None else out
    _interpolate_one(grid.cell, grid.position_frac, rows, np.ascontiguousarray(base, dtype=float),
                     np.ascontiguousarray(rise, dtype=float), out)
    return out


@dataclass(frozen=True)
class Pair:
    """Two quantities interpolated together (:func:`interpolate_pair`).

    Attributes
    ----------
    a, b : numpy.ndarray, shape (n, n_steps)
        The interpolated values.
    b_positive_sum, b_negative_sum : numpy.ndarray, shape (n,)
        Per row, the sum over the intervals of max(b, 0) and of max(-b, 0) (added interval by interval).
    """

    a: np.ndarray
    b: np.ndarray
    b_positive_sum: np.ndarray
    b_negative_sum: np.ndarray


def interpolate_pair(grid: Grid, base_a: np.ndarray, rise_a: np.ndarray, base_b: np.ndarray, rise_b: np.ndarray,
                     out_a: np.ndarray | None = None, out_b: np.ndarray | None = None,
                     rows: np.ndarray | None = None, out_rows: np.ndarray | None = None) -> Pair:
    """Two quantities tabulated on the same grid (kW and kVAr), interpolated in one pass.

    As :func:`interpolate` for each pair of tables, with the sums of the second's positive and negative
    parts (lagging and leading kVAr) taken in the same pass. With ``out_rows`` the i-th row picked is
    written to row ``out_rows[i]`` of ``out_a`` and ``out_b`` (given), which are then returned whole.

    Examples
    --------
    >>> g = locate(np.array([[1.0, 8.0, 8.0]]), np.ones((1, 3), bool), 1.0, 2)
    >>> pair = interpolate_pair(g, *tables(g.p_grid_kw), *tables(np.array([[-2.0, 0.0, 4.0]])))
    >>> pair.b.tolist(), pair.b_positive_sum.tolist(), pair.b_negative_sum.tolist()
    ([[-2.0, 4.0, 4.0]], [8.0], [2.0])
    """
    n = grid.cell.shape[0] if rows is None else len(rows)
    rows = np.arange(n, dtype=np.intp) if rows is None else np.asarray(rows, dtype=np.intp)
    shape = (n, grid.cell.shape[1])
    if out_rows is None:
        out_rows = np.arange(n, dtype=np.intp)
        out_a = np.empty(shape) if out_a is None else out_a
        out_b = np.empty(shape) if out_b is None else out_b
    elif out_a is None or out_b is None:
        raise ValueError("out_rows needs out_a and out_b")
    positive, negative = np.zeros(n), np.zeros(n)
    tables_ = [np.ascontiguousarray(t, dtype=float) for t in (base_a, rise_a, base_b, rise_b)]
    _interpolate_two(grid.cell, grid.position_frac, rows, np.asarray(out_rows, dtype=np.intp), *tables_, out_a, out_b,
                     positive, negative)
    return Pair(out_a, out_b, positive, negative)


@numba.njit(nogil=True, cache=True)
def _interpolate_one(cell, position, rows, base, rise, out):  # pragma: no cover - compiled
    """The pass of :func:`interpolate`: as numpy's ``out[i] = base[i, cell[r]] + rise[i, cell[r]] * position[r]``
    for r = rows[i], the same operations in the same order (tested against that rule bit for bit)."""
    m = cell.shape[1]
    for i in range(len(rows)):
        r = rows[i]
        for t in range(m):
            j = cell[r, t]
            out[i, t] = base[i, j] + rise[i, j] * position[r, t]


@numba.njit(nogil=True, cache=True)
def _interpolate_two(cell, position, rows, out_rows, base_a, rise_a, base_b, rise_b, out_a, out_b, positive,
                     negative):  # pragma: no cover - compiled
    """The pass of :func:`interpolate_pair`: two tables interpolated as :func:`_interpolate_one` into rows
    ``out_rows`` of ``out_a`` and ``out_b``, with the sums of ``out_b``'s positive and negative values taken on
    the way. The values are numpy's bit for bit; the two sums add in time order where numpy adds in blocks,
    so they agree with numpy's to rounding (tested to 1e-12 relative)."""
    m = cell.shape[1]
    for i in range(len(rows)):
        r, k = rows[i], out_rows[i]
        up, down = 0.0, 0.0
        for t in range(m):
            j = cell[r, t]
            x = position[r, t]
            out_a[k, t] = base_a[i, j] + rise_a[i, j] * x
            v = base_b[i, j] + rise_b[i, j] * x
            out_b[k, t] = v
            if v > 0.0:
                up += v
            elif v < 0.0:
                down -= v
        positive[i] = up
        negative[i] = down


def weighted_sums(grid: Grid, base: np.ndarray, rise: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
    """The interpolated value times each interval's hours, summed over the intervals, per row (n,).

    Notes
    -----
    Sum_t h (b_j(t) + r_j(t) x_t) = Sum_j (b_j H_j + r_j M_j), with H_j the hours of cell j and M_j their
    position-weighted hours.

    Examples
    --------
    >>> g = locate(np.array([[1.0, 8.0, 8.0]]), np.ones((1, 3), bool), 2.0, 2)
    >>> b, r = tables(g.p_grid_kw)       # the load itself
    >>> weighted_sums(g, b, r).tolist()  # 2 h x (1 + 8 + 8)
    [34.0]
    """
    hours, moment = (grid.hours_h, grid.moment_h) if rows is None else (grid.hours_h[rows], grid.moment_h[rows])
    return (base * hours).sum(axis=1) + (rise * moment).sum(axis=1)


def signed_sums(grid: Grid, base: np.ndarray, rise: np.ndarray, interval_h: float,
                rows: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The hour-weighted sums of the interpolated value's positive and negative parts, per row (n,) each.

    Sum_t h max(v_t, 0) and Sum_t h max(-v_t, 0) of v_t = b_j(t) + r_j(t) x_t (lagging and leading kVArh
    from a kVAr table), without a per-interval array: a cell whose two nodes are both >= 0 (both <= 0)
    adds b_j H_j + r_j M_j to the first sum (its negative to the second), as in :func:`weighted_sums`;
    only a row with a cell where the value changes sign, and that holds intervals, is read interval by
    interval, in those cells. A NaN value adds to neither sum.

    Parameters
    ----------
    grid : Grid
    base, rise : numpy.ndarray, shape (n, n_nodes)
        Tables (:func:`tables`) of the rows ``rows`` of the grid (default every row, in order).
    interval_h : float
        Hours each interval stands for [h].
    rows : numpy.ndarray of int, optional

    Returns
    -------
    positive, negative : numpy.ndarray, shape (n,)
        [unit of the values x h], each >= 0.

    Examples
    --------
    >>> g = locate(np.array([[1.0, 8.0, 8.0]]), np.ones((1, 3), bool), 2.0, 2)
    >>> up, down = signed_sums(g, *tables(np.array([[-2.0, 0.0, 4.0]])), 2.0)   # -2, 4, 4 per interval
    >>> up.tolist(), down.tolist()
    ([16.0], [4.0])
    """
    n = grid.cell.shape[0] if rows is None else len(rows)
    rows = np.arange(n, dtype=np.intp) if rows is None else np.asarray(rows, dtype=np.intp)
    positive, negative = np.zeros(n), np.zeros(n)
    _signed_sums(grid.cell, grid.position_frac, grid.hours_h, grid.moment_h, rows,
                 np.ascontiguousarray(base, dtype=float), np.ascontiguousarray(rise, dtype=float), float(interval_h),
                 positive, negative)
    return positive, negative


@numba.njit(nogil=True, cache=True)
def _signed_sums(cell, position, hours, moment, rows, base, rise, interval_h, positive,
                 negative):  # pragma: no cover - compiled
    """The pass of :func:`signed_sums`: cells of one sign from their hours and moments, cells that change
    sign interval by interval. A sum over cells and intervals: it adds in its own order where a numpy rule
    would add in blocks, so it agrees with one to rounding (tested to 1e-12 relative)."""
    m = cell.shape[1]
    n_nodes = base.shape[1]
    for i in range(len(rows)):
        r = rows[i]
        up, down = 0.0, 0.0
        mixed = False
        for j in range(n_nodes):
            if hours[r, j] == 0.0:
                continue
            b, e = base[i, j], base[i, j] + rise[i, j]
            if b >= 0.0 and e >= 0.0:
                up += b * hours[r, j] + rise[i, j] * moment[r, j]
            elif b <= 0.0 and e <= 0.0:
                down -= b * hours[r, j] + rise[i, j] * moment[r, j]
            else:
                mixed = True
        if mixed:  # the cells where the value changes sign (or is NaN), interval by interval
            for t in range(m):
                j = cell[r, t]
                b, e = base[i, j], base[i, j] + rise[i, j]
                if (b >= 0.0 and e >= 0.0) or (b <= 0.0 and e <= 0.0):
                    continue
                v = b + rise[i, j] * position[r, t]
                if v > 0.0:
                    up += v * interval_h
                elif v < 0.0:
                    down -= v * interval_h
        positive[i] = up
        negative[i] = down


class CurveBook:
    """Per-interval rows of two quantities (kW, kVAr) for (option, row) pairs, kept compact.

    A block of assets under several options has per-interval arrays ``p``, ``q`` of shape
    (n_options, n_rows, n_steps). A pair whose curves are tabulated need not be written there: the book
    keeps its tables and its row of a grid, and :meth:`fill` interpolates the pair when it is read (the
    values :func:`interpolate_pair` would have written, the same bits). A pair that cannot be tabulated
    keeps its own per-interval values in the book (:meth:`add_rows`), so the arrays need no row for it;
    a pair may also stand for another option's row of the same asset (:meth:`repeat`: an option that
    does not apply repeats today's values); any other pair is read from the arrays themselves.

    Parameters
    ----------
    n_options, n_rows : int
        The arrays' first two dimensions.

    Notes
    -----
    Grids whose cells are uint8 (at most 256 nodes) and int32 go to two slots, each the rows of its
    grids stacked (one grid in a slot is used as it is, without a copy); the book's own rows are slot 2,
    today's rows shifted (:meth:`shift`, their kVAr shifts in ``shift``) slot 3. :meth:`arrays` gives what the compiled readers take: (table, source, slot, grid_row, offset,
    cell_a, position_a, cell_b, position_b, p_base, p_rise, q_base, q_rise, finite, own_p, own_q, shift),
    ``finite`` per entry: whether its tables and its grid row's positions (or its own row) are all
    finite (then so is every value read through it; False for slot 3, read through today's row).
    """

    def __init__(self, n_options: int, n_rows: int):
        self.table = np.full((n_options, n_rows), -1, dtype=np.int64)
        self.source = np.repeat(np.arange(n_options, dtype=np.int64)[:, None], n_rows, axis=1)
        self._grids: list[list[Grid]] = [[], []]  # by cell dtype: uint8, int32
        # (slot, grid in slot, grid rows, p_base, p_rise, q_base, q_rise), or (2, first own row, rows) for own rows
        self._entries: list[tuple] = []
        self._own: list[tuple[np.ndarray, np.ndarray]] = []  # (p, q) per add_rows call
        self._n_entries = 0
        self._frozen = None

    def add(self, option: int, rows: np.ndarray, grid: Grid, grid_rows: np.ndarray, p_tables: tuple,
            q_tables: tuple) -> None:
        """Pairs (option, rows[i]) read as rows ``grid_rows[i]`` of ``grid`` with tables row i of
        ``p_tables`` = (base, rise) and ``q_tables`` (:func:`tables`, each (len(rows), n_nodes))."""
        slot = 0 if grid.cell.dtype == np.uint8 else 1
        grids = self._grids[slot]
        at = next((g for g, known in enumerate(grids) if known is grid), None)
        if at is None:
            grids.append(grid)
            at = len(grids) - 1
        rows = np.asarray(rows, dtype=np.intp)
        self._entries.append((slot, at, np.asarray(grid_rows, dtype=np.intp),
                              *(np.ascontiguousarray(t, dtype=float) for t in (*p_tables, *q_tables))))
        self.table[option, rows] = self._n_entries + np.arange(len(rows))
        self._n_entries += len(rows)
        self._frozen = None

    def add_rows(self, option: int, rows: np.ndarray, p_values: np.ndarray, q_values: np.ndarray) -> None:
        """Pairs (option, rows[i]) read as row i of ``p_values`` and ``q_values`` (len(rows), n_steps)."""
        rows = np.asarray(rows, dtype=np.intp)
        own = sum(len(p) for p, _ in self._own)
        self._own.append((np.ascontiguousarray(p_values, dtype=float), np.ascontiguousarray(q_values, dtype=float)))
        self._entries.append((2, own, len(rows)))
        self.table[option, rows] = self._n_entries + np.arange(len(rows))
        self._n_entries += len(rows)
        self._frozen = None

    def shift(self, option: int, rows: np.ndarray, q_shift: np.ndarray) -> None:
        """Pairs (option, rows[i]) read as today's row (the arrays' option 0) with ``q_shift[i]`` taken off
        the kVAr while the kW is not 0, and 0 while it is (``models.operation.capacitor_rows_kvar``, the
        same operations): a terminal capacitor switched with today's motor."""
        rows = np.asarray(rows, dtype=np.intp)
        self._entries.append((3, 0, len(rows), np.ascontiguousarray(q_shift, dtype=float)))
        self.table[option, rows] = self._n_entries + np.arange(len(rows))
        self._n_entries += len(rows)
        self._frozen = None

    def repeat(self, option: int, rows: np.ndarray, from_option: int = 0) -> None:
        """Pairs (option, rows) read as (from_option, rows): its tables, or its rows of the arrays."""
        rows = np.asarray(rows, dtype=np.intp)
        self.table[option, rows] = self.table[from_option, rows]
        self.source[option, rows] = self.source[from_option, rows]
        self._frozen = None

    def tabulated(self, option: int) -> np.ndarray:
        """Rows (bool, (n_rows,)) of an option that the book holds (not in the arrays)."""
        return self.table[option] >= 0

    def arrays(self) -> tuple:
        """The book as plain arrays for the compiled readers (see the class notes)."""
        if self._frozen is not None:
            return self._frozen
        slots = []
        for s, grids in enumerate(self._grids):
            dtype = np.uint8 if s == 0 else np.int32
            if not grids:
                slots.append((np.zeros((0, 0), dtype=dtype), np.zeros((0, 0)), []))
            elif len(grids) == 1:
                slots.append((grids[0].cell, grids[0].position_frac, [0]))
            else:
                starts = np.cumsum([0] + [g.cell.shape[0] for g in grids[:-1]]).tolist()
                slots.append((np.concatenate([g.cell for g in grids]), np.concatenate([g.position_frac for g in grids]),
                              starts))
        if not self._own:
            own_p = own_q = np.zeros((0, 0))
        elif len(self._own) == 1:
            own_p, own_q = self._own[0]
        else:
            own_p = np.concatenate([p for p, _ in self._own])
            own_q = np.concatenate([q for _, q in self._own])
        n = self._n_entries
        slot, grid_row, offset = np.zeros(n, np.int64), np.zeros(n, np.int64), np.zeros(n, np.int64)
        finite = np.zeros(n, dtype=bool)
        positions_finite = [[np.isfinite(g.position_frac).all(axis=1) if g.position_finite is None else g.position_finite
                             for g in grids] for grids in self._grids]
        flat: list[list[np.ndarray]] = [[], [], [], []]
        shifts: list[np.ndarray] = []
        n_shift = 0
        k = at = 0
        for s, g, grid_rows, *tabs in self._entries:
            if s == 3:  # today's row shifted: n_e = grid_rows of them, their shifts from n_shift on
                n_e = grid_rows
                slot[k:k + n_e] = 3
                grid_row[k:k + n_e] = n_shift + np.arange(n_e)
                shifts.append(tabs[0])
                n_shift += n_e
                k += n_e  # (finite stays False: readers take the general path, which reads today's row)
                continue
            if s == 2:  # the book's own rows: n_e = grid_rows of them from row g of own_p / own_q
                n_e = grid_rows
                slot[k:k + n_e] = 2
                grid_row[k:k + n_e] = g + np.arange(n_e)
                finite[k:k + n_e] = (np.isfinite(own_p[g:g + n_e]).all(axis=1) & np.isfinite(own_q[g:g + n_e]).all(axis=1))
                k += n_e
                continue
            n_e, width = tabs[0].shape
            slot[k:k + n_e] = s
            grid_row[k:k + n_e] = slots[s][2][g] + grid_rows
            offset[k:k + n_e] = at + width * np.arange(n_e)
            finite[k:k + n_e] = positions_finite[s][g][grid_rows]
            for store, t in zip(flat, tabs):
                store.append(t.ravel())
                finite[k:k + n_e] &= np.isfinite(t).all(axis=1)
            k += n_e
            at += n_e * width
        tables_ = [np.concatenate(f) if f else np.zeros(0) for f in flat]
        shift = np.concatenate(shifts) if shifts else np.zeros(0)
        self._frozen = (self.table, self.source, slot, grid_row, offset, slots[0][0], slots[0][1], slots[1][0],
                        slots[1][1], *tables_, finite, own_p, own_q, shift)
        return self._frozen

    def fill(self, option: int, rows: np.ndarray, p: np.ndarray, q: np.ndarray, out_p: np.ndarray,
             out_q: np.ndarray, out_rows: np.ndarray | None = None) -> None:
        """Write the pairs (option, rows[i]) to rows ``out_rows[i]`` (default i) of ``out_p``, ``out_q``.

        ``p``, ``q`` are the block's arrays (n_options or fewer, n_rows, n_steps), read for pairs the book
        does not hold.
        """
        rows = np.asarray(rows, dtype=np.intp)
        out_rows = np.arange(len(rows), dtype=np.intp) if out_rows is None else np.asarray(out_rows, dtype=np.intp)
        fill_rows(self.arrays(), np.full(len(rows), option, dtype=np.intp), rows, p, q, out_p, out_q, out_rows)


def fill_rows(book: tuple, options: np.ndarray, rows: np.ndarray, p: np.ndarray, q: np.ndarray, out_p: np.ndarray,
              out_q: np.ndarray, out_rows: np.ndarray) -> None:
    """:meth:`CurveBook.fill` of pairs (options[i], rows[i]) from a book's :meth:`CurveBook.arrays`."""
    _fill_pairs(book, np.asarray(options, dtype=np.intp), np.asarray(rows, dtype=np.intp), p, q, out_p, out_q,
                np.asarray(out_rows, dtype=np.intp))


@numba.njit(nogil=True, cache=True)
def _fill_pairs(book, options, rows, p, q, out_p, out_q, out_rows):  # pragma: no cover - compiled
    """Each pair (options[i], rows[i]) of the book into row out_rows[i] of out_p, out_q, by :func:`fill_pair`
    (the values of the rule it follows, bit for bit)."""
    for i in range(len(rows)):
        fill_pair(book, options[i], rows[i], p, q, out_p[out_rows[i]], out_q[out_rows[i]])


@numba.njit(nogil=True, cache=True)
def _fill_pair(table, source, slot, grid_row, offset, cell_a, position_a, cell_b, position_b, p_base, p_rise, q_base,
               q_rise, own_p, own_q, shift, o, r, p, q, out_p, out_q):  # pragma: no cover - compiled
    """Pair (o, r) into out_p, out_q (n_steps,): interpolated as :func:`_interpolate_two`, copied, or today's
    row shifted (:meth:`CurveBook.shift`)."""
    m = out_p.shape[0]
    k = table[o, r]
    if k < 0:
        s = source[o, r]
        for t in range(m):
            out_p[t] = p[s, r, t]
            out_q[t] = q[s, r, t]
    elif slot[k] == 0:
        _interpolate_row(cell_a, position_a, grid_row[k], offset[k], p_base, p_rise, q_base, q_rise, out_p, out_q)
    elif slot[k] == 1:
        _interpolate_row(cell_b, position_b, grid_row[k], offset[k], p_base, p_rise, q_base, q_rise, out_p, out_q)
    elif slot[k] == 2:
        g = grid_row[k]
        for t in range(m):
            out_p[t] = own_p[g, t]
            out_q[t] = own_q[g, t]
    else:
        c = shift[grid_row[k]]
        for t in range(m):
            v = p[0, r, t]
            out_p[t] = v
            out_q[t] = q[0, r, t] - c if v != 0.0 else 0.0


@numba.njit(nogil=True, cache=True)
def _interpolate_row(cell, position, g, at, p_base, p_rise, q_base, q_rise, out_p, out_q):  # pragma: no cover - compiled
    """Grid row g's intervals interpolated on tables flattened from ``at`` (as :func:`_interpolate_two`)."""
    for t in range(out_p.shape[0]):
        j = at + cell[g, t]
        x = position[g, t]
        out_p[t] = p_base[j] + p_rise[j] * x
        out_q[t] = q_base[j] + q_rise[j] * x


@numba.njit(nogil=True, cache=True)
def fill_pair(book, o, r, p, q, out_p, out_q):  # pragma: no cover - compiled
    """:func:`_fill_pair` with the book as the tuple :meth:`CurveBook.arrays` (for other compiled passes)."""
    _fill_pair(book[0], book[1], book[2], book[3], book[4], book[5], book[6], book[7], book[8], book[9], book[10],
               book[11], book[12], book[14], book[15], book[16], o, r, p, q, out_p, out_q)
