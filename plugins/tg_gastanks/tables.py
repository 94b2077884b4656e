"""Tables of smooth functions of two variables: bicubic Hermite patches on a uniform grid, evaluated over ``ops``.

A table holds node values of several quantities on a uniform grid in (x, y). Each cell carries the 16
coefficients of the bicubic Hermite patch through its four corners' values and derivatives (Press et al.,
*Numerical Recipes*, 3rd ed., 2007, section 3.6.3, "bicubic interpolation"; from memory). The derivatives at the
nodes are fourth-order central differences of the node values (second order one-sided at the grid's edges), so
the table is built from values alone, is local (a cell depends on the nodes within two of it) and continuous
with its first derivatives across cells; for a smooth function its error falls as the fourth power of the
spacing.

Evaluation follows the one-definition convention of :mod:`thrustgraph.base.xp`: one function of the point
(:meth:`CubicTable2D.patches`, on floats or arrays) serves one design, through ``ops.each``, and an ensemble,
over arrays of designs at once.
Outside the grid the edge cells' patches are continued (extrapolated): keep the grid over the declared range.

Examples
--------
>>> import numpy as np
>>> from thrustgraph.base.xp import array_ops, scalar_ops
>>> x, y = np.linspace(0.0, 2.0, 21), np.linspace(1.0, 3.0, 11)
>>> X, Y = np.meshgrid(x, y, indexing="ij")
>>> t = CubicTable2D.from_nodes(x, y, np.stack([X * Y, np.sin(X) * Y]))
>>> [round(v, 6) for v in t(0.55, 2.05, scalar_ops)]
[1.1275, 1.071509]
>>> round(float(np.sin(0.55) * 2.05), 6)
1.071509
>>> [v.round(6).tolist() for v in t(np.array([0.55, 1.0]), np.array([2.05, 3.0]), array_ops)]
[[1.1275, 3.0], [1.071509, 2.524413]]
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["CubicTable1D", "CubicTable2D", "node_derivative"]

#: Hermite basis: p(t) = [1 t t^2 t^3] M [f(0) f(1) f'(0) f'(1)]^T.
_M = np.array([[1.0, 0.0, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0], [-3.0, 3.0, -2.0, -1.0], [2.0, -2.0, 1.0, 1.0]])


def node_derivative(f: np.ndarray, axis: int) -> np.ndarray:
    """d f / d(index) along ``axis``: fourth-order central differences inside, second-order at the two edges.

    >>> node_derivative(np.arange(8.0) ** 3, 0)[2:6].tolist()      # exact for cubics inside
    [12.0, 27.0, 48.0, 75.0]
    """
    f = np.moveaxis(np.asarray(f, dtype=float), axis, 0)
    d = np.gradient(f, axis=0, edge_order=2)
    if f.shape[0] >= 5:
        d[2:-2] = (f[:-4] - 8.0 * f[1:-3] + 8.0 * f[3:-1] - f[4:]) / 12.0
    return np.moveaxis(d, 0, axis)


@dataclass(frozen=True)
class CubicTable2D:
    """Bicubic Hermite patches of ``nq`` quantities over a uniform grid ``x`` (n) by ``y`` (m).

    ``coef`` has the shape ((n - 1) (m - 1), nq, 4, 4): cell k = i (m - 1) + j, quantity q, powers of the local
    coordinates u = (x - x_i)/hx and v = (y - y_j)/hy.
    """

    x: np.ndarray
    y: np.ndarray
    coef: np.ndarray
    values: np.ndarray | None = None

    @classmethod
    def from_nodes(cls, x: np.ndarray, y: np.ndarray, values: np.ndarray) -> "CubicTable2D":
        """The table through ``values`` of shape (nq, n, m) at the nodes of the uniform grids ``x`` and ``y``."""
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        f = np.asarray(values, dtype=float)
        fx, fy = node_derivative(f, 1), node_derivative(f, 2)      # per unit of the index: scaled to the cell
        fxy = node_derivative(fy, 1)
        # F[k, q] = [[f00, f01, fy00, fy01], [f10, f11, fy10, fy11], [fx00, fx01, fxy00, fxy01], [fx10, ...]]
        def corners(g):
            return np.stack([np.stack([g[:, :-1, :-1], g[:, :-1, 1:]], -1), np.stack([g[:, 1:, :-1], g[:, 1:, 1:]], -1)],
                            -2)
        F = np.concatenate([np.concatenate([corners(f), corners(fy)], -1),
                            np.concatenate([corners(fx), corners(fxy)], -1)], -2)     # (nq, n-1, m-1, 4, 4)
        C = np.einsum("ab,qijbc,dc->ijqad", _M, F, _M)
        n, m = len(x), len(y)
        return cls(x, y, np.ascontiguousarray(C.reshape((n - 1) * (m - 1), f.shape[0], 4, 4)), f)

    def __call__(self, x: Any, y: Any, ops: Any) -> tuple[Any, ...]:
        """The quantities at (x, y): a tuple of floats (floats given) or arrays (arrays given).

        One design's floats go through ``ops.each`` (a plain call for :data:`~thrustgraph.base.xp.scalar_ops`,
        one recorded call for a namespace that traces the balance into straight-line code); arrays of designs
        are evaluated together by the same patches (:meth:`patches`)."""
        if ops.arrays:
            return tuple(np.moveaxis(self.patches(np.asarray(x, dtype=float), np.asarray(y, dtype=float)), -1, 0))
        return ops.each(self.at, x, y, outputs=self.coef.shape[1])

    def at(self, x: float, y: float) -> tuple[float, ...]:
        """The quantities at one point (floats): the cell found by plain arithmetic, the same patch and the same
        operations as :meth:`patches`."""
        xs, ys = self.x, self.y
        n, m = len(xs), len(ys)
        hx, hy = xs[1] - xs[0], ys[1] - ys[0]
        a, b = (x - xs[0]) / hx, (y - ys[0]) / hy
        i, j = math.floor(a), math.floor(b)
        i = 0 if i < 0 else (n - 2 if i > n - 2 else i)
        j = 0 if j < 0 else (m - 2 if j > m - 2 else j)
        u, v = a - i, b - j
        c = self.coef[i * (m - 1) + j]
        return tuple(_combine(c, np.array((1.0, u, u * u, u * u * u)), np.array((1.0, v, v * v, v * v * v))).tolist())

    def patches(self, x: Any, y: Any) -> np.ndarray:
        """The patch values at arrays of points (x, y): shape (..., nq). The cell is the grid interval that holds
        the point (the first or last one outside the grid)."""
        xs, ys = self.x, self.y
        n, m = len(xs), len(ys)
        hx, hy = xs[1] - xs[0], ys[1] - ys[0]
        a, b = (x - xs[0]) / hx, (y - ys[0]) / hy
        i = np.clip(np.floor(a).astype(int), 0, n - 2)
        j = np.clip(np.floor(b).astype(int), 0, m - 2)
        u, v = a - i, b - j
        c = self.coef[i * (m - 1) + j]                                   # (..., nq, 4, 4)
        return _combine(c, np.stack([u * 0.0 + 1.0, u, u * u, u * u * u], axis=-1),
                        np.stack([v * 0.0 + 1.0, v, v * v, v * v * v], axis=-1))


@dataclass(frozen=True)
class CubicTable1D:
    """Cubic Hermite pieces of ``nq`` quantities over a uniform grid ``x`` (n nodes), node derivatives as in
    :class:`CubicTable2D`; ``coef`` has the shape (n - 1, nq, 4) (powers of u = (x - x_i)/h).

    >>> from thrustgraph.base.xp import array_ops, scalar_ops
    >>> x = np.linspace(0.0, 1.0, 41)
    >>> t = CubicTable1D.from_nodes(x, np.stack([np.exp(x), x ** 3]))
    >>> [round(v, 8) for v in t(0.31, scalar_ops)], round(math.exp(0.31), 8)
    ([1.36342511, 0.029791], 1.36342511)
    >>> [a.round(6).tolist() for a in t(np.array([0.31, 1.0]), array_ops)]
    [[1.363425, 2.718282], [0.029791, 1.0]]
    """

    x: np.ndarray
    coef: np.ndarray
    values: np.ndarray | None = None

    @classmethod
    def from_nodes(cls, x: np.ndarray, values: np.ndarray) -> "CubicTable1D":
        """The table through ``values`` of shape (nq, n) at the nodes of the uniform grid ``x``."""
        f = np.asarray(values, dtype=float)
        d = node_derivative(f, 1)
        F = np.stack([f[:, :-1], f[:, 1:], d[:, :-1], d[:, 1:]], -1)       # (nq, n-1, 4)
        C = np.einsum("ab,qib->iqa", _M, F)
        return cls(np.asarray(x, dtype=float), np.ascontiguousarray(C), f)

    def __call__(self, x: Any, ops: Any) -> tuple[Any, ...]:
        """The quantities at x: floats through ``ops.each`` (as :meth:`CubicTable2D.__call__`) or arrays."""
        if ops.arrays:
            return tuple(np.moveaxis(self.pieces(np.asarray(x, dtype=float)), -1, 0))
        return ops.each(self.at, x, outputs=self.coef.shape[1])

    def at(self, x: float) -> tuple[float, ...]:
        """The quantities at one point (floats)."""
        xs = self.x
        h = xs[1] - xs[0]
        a = (x - xs[0]) / h
        i = math.floor(a)
        i = 0 if i < 0 else (len(xs) - 2 if i > len(xs) - 2 else i)
        u = a - i
        return tuple(np.matmul(self.coef[i], np.array((1.0, u, u * u, u * u * u))).tolist())

    def pieces(self, x: Any) -> np.ndarray:
        """The piece values at an array of points: shape (..., nq)."""
        xs = self.x
        h = xs[1] - xs[0]
        a = (x - xs[0]) / h
        i = np.clip(np.floor(a).astype(int), 0, len(xs) - 2)
        u = a - i
        return np.matmul(self.coef[i], np.stack([u * 0.0 + 1.0, u, u * u, u * u * u], axis=-1)[..., None])[..., 0]


def _combine(c: np.ndarray, bu: np.ndarray, bv: np.ndarray) -> np.ndarray:
    """sum_ab c[..., q, a, b] u^a v^b: two matrix products (faster than one einsum on one point's small arrays)."""
    return np.matmul(np.matmul(c, bv[..., None, :, None])[..., 0], bu[..., :, None])[..., 0]
