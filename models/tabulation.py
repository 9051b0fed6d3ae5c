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
"""

from __future__ import annotations

from dataclasses import dataclass

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
    cell : numpy.ndarray of intp, shape (n_assets, n_steps)
        Flat index of each interval's cell in an (n_assets, n_nodes) table: the row's cell j in 0 .. n_nodes - 2,
        or the row's last entry (a zero cell) where the asset does not run.
    position_frac : numpy.ndarray, shape (n_assets, n_steps)
        Position of the interval's load within its cell, 0 at the lower node and 1 at the upper [-].
    hours_h, moment_h : numpy.ndarray, shape (n_assets, n_nodes)
        Per cell: the hours of its intervals, and those hours each times its position [h] (zero cell last).
    """

    p_grid_kw: np.ndarray
    cell: np.ndarray
    position_frac: np.ndarray
    hours_h: np.ndarray
    moment_h: np.ndarray

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
    u = np.cbrt(p_kw)
    u_lo = np.where(running, u, np.inf).min(axis=1, initial=np.inf)
    u_hi = np.where(running, u, -np.inf).max(axis=1, initial=-np.inf)
    none = ~np.isfinite(u_lo)
    u_lo = np.where(none, 0.0, u_lo)
    u_hi = np.where(none, 0.0, u_hi)
    step = (u_hi - u_lo) / (n_nodes - 1)
    cols = np.arange(2 * n_nodes - 1) / 2.0
    u_grid = u_lo[:, None] + cols[None, :] * step[:, None]
    u_grid[:, -1] = u_hi  # the last node is the largest load itself
    p_grid = u_grid ** 3
    safe = np.where(step > 0, step, 1.0)
    t = u
    t -= u_lo[:, None]
    t /= safe[:, None]
    np.clip(t, 0.0, n_nodes - 1, out=t)
    j = np.minimum(t.astype(np.intp), n_nodes - 2)
    t -= j
    position = t
    j += (np.arange(n, dtype=np.intp) * n_nodes)[:, None]
    zero_cell = (np.arange(n, dtype=np.intp) * n_nodes + n_nodes - 1)[:, None]
    np.copyto(j, np.broadcast_to(zero_cell, j.shape), where=~running)
    np.copyto(position, 0.0, where=~running)
    hours = np.bincount(j.ravel(), minlength=n * n_nodes).reshape(n, n_nodes) * float(interval_h)
    moment = np.bincount(j.ravel(), weights=position.ravel(), minlength=n * n_nodes).reshape(n, n_nodes) * float(interval_h)
    hours[:, -1] = 0.0
    return Grid(p_grid, j, position, hours, moment)


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
    nodes = values_on_grid[:, 0::2]
    base = np.zeros(nodes.shape)
    rise = np.zeros(nodes.shape)
    base[:, :-1] = nodes[:, :-1]
    rise[:, :-1] = nodes[:, 1:] - nodes[:, :-1]
    return base, rise


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
    nodes = values_on_grid[:, 0::2]
    mid = values_on_grid[:, 1::2]
    if mid.shape[1] == 0:
        return np.zeros(values_on_grid.shape[0])
    return np.abs(mid - 0.5 * (nodes[:, :-1] + nodes[:, 1:])).max(axis=1)


def interpolate(grid: Grid, base: np.ndarray, rise: np.ndarray, out: np.ndarray | None = None,
                rows: np.ndarray | None = None) -> np.ndarray:
    """The interpolated value in every interval (n, n_steps), 0 where the asset does not run.

    ``rows`` picks rows of the grid (their tables ``base``, ``rise`` of shape (len(rows), n_nodes));
    ``out`` receives the result.
    """
    cell, position = grid.cell, grid.position_frac
    if rows is not None:
        k = grid.n_nodes
        cell = cell[rows] - (rows * k)[:, None] + (np.arange(len(rows), dtype=np.intp) * k)[:, None]
        position = position[rows]
    if out is None:
        out = np.empty(cell.shape)
    np.take(base.ravel(), cell, out=out)
    slope = np.take(rise.ravel(), cell)
    slope *= position
    out += slope
    return out


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
