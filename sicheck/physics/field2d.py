"""2D quasi-static (TEM) field solver for a trace or an edge-coupled pair.

Method: finite volumes for div(eps grad phi) = 0 on a graded tensor-product grid
(node-centred; each cell holds one material, so every dielectric interface, conductor
face and mask surface is a grid line). Capacitance per length comes from the field
energy, C = eps0 * sum over grid edges of coefficient * (delta phi)^2, which converges
smoothly under refinement. The grid is refined geometrically towards conductor corners
(where the field is singular) and expands geometrically out to a far boundary.

The cross-section is symmetric about x = 0 (one trace centred, or a pair placed at
+/- (s + w)/2), so only x >= 0 is solved: a natural (Neumann) boundary at x = 0 gives a
single trace or a pair's even mode, a grounded one (phi = 0) the odd mode.

Error estimate: the same geometry at three refinement levels with ratio sqrt(2);
Richardson extrapolation with the observed order, and a grid-convergence index
(safety factor 1.25, Roache 1994) as the uncertainty. Levels are added until the
uncertainty of Z is below the target. The far boundary sits at 100x the structure
size, where the truncation error (about (size/R)^2) is below 1e-4.

Conductor loss: Wheeler's incremental-inductance rule (Wheeler, Proc. IRE 30, 1942) needs
dZ_air/dn for every conductor wall receded by n. It is the derivative of the air solution's
discrete energy under a motion of the grid lines that carries the walls (energy_rate): exact
for the discrete problem, no further solve, extrapolated over the same levels.
"""

from __future__ import annotations

import math
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import splu

from sicheck.physics.constants import C0, EPS0
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.line_result import LineResult

RATIO = math.sqrt(2.0)
FAR = 100.0
GCI_SAFETY = 1.25
DEFAULT_TARGET_PCT = 0.3
LOSS_TARGET_PCT = 2.0       # stated uncertainty asked of the conductor loss (Wheeler's dZ_air/dn and Z0)
D_FINE_DIVISOR = 500.0      # corner spacing at level 0: smallest feature / 500
GROWTH0 = 0.3               # spacing grows by 0.3 x distance from the nearest corner at level 0


@dataclass(frozen=True)
class Box:
    """Axis-aligned rectangle [x0, x1] x [y0, y1]."""

    x0: float
    x1: float
    y0: float
    y1: float


@dataclass
class Layout:
    """The half cross-section (x >= 0) as rectangles, in metres."""

    conductors: list[Box]              # the trace (or the right-hand trace of a pair)
    trapezoid: tuple[float, float] | None  # (bottom half-offsets) for an etched trace, see _in_conductor
    dielectrics: list[tuple[Box, float, float]]   # (box, er, loss tangent); later boxes override earlier ones
    y_top: float                       # upper plane (stripline) or far boundary
    x_far: float
    open_top: bool
    x_keys: list[float]                # coordinates that must be grid lines
    y_keys: list[float]
    x_fine: list[float]                # where the grid is finest (corners)
    y_fine: list[float]
    d_fine: float                      # finest spacing at level 0
    scale: float
    x_motion: list[tuple[float, float]] = ()   # (x, dx/dn) anchors of Wheeler's recession, see grid_motion
    y_motion: list[tuple[float, float]] = ()


def layout_of(xs: CrossSection) -> Layout:
    w, t = xs.width, xs.thickness
    wt = xs.top_width if xs.top_width is not None else w
    below = list(reversed(xs.below))    # from the plane upward
    yb = sum(s.thickness for s in below)
    yt = yb + t
    if xs.coupled:
        xl = xs.gap / 2.0
    else:
        xl = -w / 2.0                   # single trace straddles x = 0
    xr = xl + w
    # top face is centred on the bottom face
    inset = (w - wt) / 2.0
    xtl, xtr = xl + inset, xr - inset
    cond = Box(max(xl, 0.0), xr, yb, yt)
    trap = (inset, t) if inset > 0 and t > 0 else None

    diel: list[tuple[Box, float, float]] = []
    y = 0.0
    big = 1e3
    for s in below:
        diel.append((Box(0.0, big, y, y + s.thickness), s.er, s.loss_tangent))
        y += s.thickness
    above = list(xs.above)
    y_keys = [0.0, yb, yt]
    x_keys = [0.0, max(xl, 0.0), xr, max(xtl, 0.0), xtr]
    if xs.kind == "stripline":
        y_top = yt + sum(s.thickness for s in above)
        y0 = yb
        yy = yt
        for k, s in enumerate(above):
            lo = y0 if k == 0 else yy
            yy += s.thickness
            diel.append((Box(0.0, big, lo, yy), s.er, s.loss_tangent))
            y_keys.append(yy)
        open_top = False
    else:
        yy = yt
        first = True
        for s in above:
            if first and s.conformal:
                c = s.thickness
                diel.append((Box(0.0, big, yb, yb + c), s.er, s.loss_tangent))
                diel.append((Box(max(xl - c, 0.0), xr + c, yb, yt + c), s.er, s.loss_tangent))
                y_keys += [yb + c, yt + c]
                x_keys += [max(xl - c, 0.0), xr + c]
                yy = yt + c
            else:
                lo = yb if first else yy
                yy = (yt if first else yy) + s.thickness
                diel.append((Box(0.0, big, lo, yy), s.er, s.loss_tangent))
                y_keys.append(yy)
            first = False
        open_top = True
        y_top = None  # set below
    feature = [w, yb]
    if t > 0:
        feature.append(t)
    if xs.coupled:
        feature.append(xs.gap)
    for s in list(xs.below) + list(xs.above):
        feature.append(s.thickness)
    d_fine = min(feature) / D_FINE_DIVISOR
    extent = max(xr, max(y_keys))
    scale = max(extent, w)
    if open_top:
        y_top = FAR * scale
        x_far = FAR * scale
    else:
        # fields in a stripline decay like exp(-pi x / b): 8 b beyond the trace is ample
        x_far = xr + 8.0 * y_top
    x_fine = [k for k in (max(xl, 0.0), xr, max(xtl, 0.0), xtr) if k > 0 or xs.coupled]
    y_fine = [yb, yt]
    # Wheeler's recession as a motion of the grid lines (per unit recession n): every conductor wall
    # moves n into its metal, the symmetry plane and the far boundary stay. Same convention as
    # loss.receded: faces of the trace inward, planes away, a zero-thickness strip only narrows
    # (its plane spacings then grow by 2n each side).
    x_motion = [(0.0, 0.0), (xtr, -1.0), (xr, -1.0), (float(x_far), 0.0)]
    if xs.coupled:
        x_motion += [(xl, 1.0), (xtl, 1.0)]
    far_v = 0.0 if open_top else 1.0
    if t > 0:
        y_motion = [(0.0, -1.0), (yb, 1.0), (yt, -1.0), (float(y_top), far_v)]
    else:
        y_motion = [(0.0, -2.0), (yb, 0.0), (float(y_top), 2.0 * far_v)]
    return Layout([cond], trap, diel, float(y_top), float(x_far), open_top, sorted(set(x_keys)),
                  sorted(set(y_keys)), x_fine, y_fine, d_fine, scale, x_motion, y_motion)


def graded_axis(lo: float, hi: float, keys: list[float], fine: list[float], d0: float, growth: float,
                d_max: float) -> np.ndarray:
    """Grid lines from lo to hi through every key; spacing d0 at `fine` points, growing linearly."""
    keys = sorted({k for k in keys if lo <= k <= hi} | {lo, hi})
    fine_pts = [float(f) for f in (fine if fine else [lo])]

    def size(p):
        # plain floats: this runs once per grid line, where numpy's call overhead dominates
        return min(d_max, d0 + growth * min(abs(f - p) for f in fine_pts))

    pts = [keys[0]]
    for a, b in zip(keys[:-1], keys[1:]):
        if b - a <= 0:
            continue
        marks = [a]
        p = a
        end = b - 0.3 * size(b)
        while True:
            step = size(p)
            if p + step >= end:
                break
            p += step
            marks.append(p)
        marks.append(b)
        m = np.asarray(marks)
        m = a + (m - a) * (b - a) / (m[-1] - a)       # land exactly on b
        pts.extend(m[1:].tolist())
    return np.asarray(pts)


@dataclass
class Problem:
    x: np.ndarray
    y: np.ndarray
    eps: np.ndarray          # (nx-1, ny-1) relative permittivity of each cell
    conductor: np.ndarray    # (nx, ny) bool
    tand: np.ndarray | None = None   # (nx-1, ny-1) loss tangent of each cell


def discretise(lay: Layout, level: int) -> Problem:
    f = RATIO**level
    d0 = lay.d_fine / f
    growth = GROWTH0 / f
    x = graded_axis(0.0, lay.x_far, lay.x_keys, lay.x_fine, d0, growth, 1e9)
    y = graded_axis(0.0, lay.y_top, lay.y_keys, lay.y_fine, d0, growth, 1e9)
    xc = 0.5 * (x[:-1] + x[1:])
    yc = 0.5 * (y[:-1] + y[1:])
    eps = np.ones((len(xc), len(yc)))
    tand = np.zeros_like(eps)
    for box, er, td in lay.dielectrics:
        mx = (xc >= box.x0) & (xc <= box.x1)
        my = (yc >= box.y0) & (yc <= box.y1)
        eps[np.ix_(mx, my)] = er
        tand[np.ix_(mx, my)] = td
    cond = np.zeros((len(x), len(y)), dtype=bool)
    tol = 1e-12 * lay.scale
    for box in lay.conductors:
        mx = (x >= box.x0 - tol) & (x <= box.x1 + tol)
        my = (y >= box.y0 - tol) & (y <= box.y1 + tol)
        block = np.outer(mx, my)
        if lay.trapezoid is not None:
            inset, t = lay.trapezoid
            # at height u above the bottom face the trace is narrower by inset*u/t on each side
            u = np.clip((y - box.y0) / t, 0.0, 1.0)
            X, U = np.meshgrid(x, u, indexing="ij")
            left_ok = (box.x0 <= tol) | (X >= box.x0 + inset * U - tol)
            right_ok = X <= box.x1 - inset * U + tol
            block &= left_ok & right_ok
        cond |= block
    return Problem(x, y, eps, cond, tand)


def _faces(eps: np.ndarray, dx: np.ndarray, dy: np.ndarray):
    """Dual-face lengths times eps: of the edges along x (half the cell below and half above), and along y."""
    nx, ny = len(dx) + 1, len(dy) + 1
    fx = np.zeros((nx - 1, ny))
    fx[:, :-1] += eps * dy[None, :] / 2.0
    fx[:, 1:] += eps * dy[None, :] / 2.0
    fy = np.zeros((nx, ny - 1))
    fy[:-1, :] += eps * dx[:, None] / 2.0
    fy[1:, :] += eps * dx[:, None] / 2.0
    return fx, fy


def _edge_coefficients(p: Problem, eps: np.ndarray | None = None):
    """Coupling of each grid edge: eps * dual face length / edge length."""
    dx, dy = np.diff(p.x), np.diff(p.y)
    fx, fy = _faces(p.eps if eps is None else eps, dx, dy)
    return fx / dx[:, None], fy / dy[None, :]


class _System:
    """The linear system of one grid and one set of boundary conditions, for any permittivity.

    Sparsity, Dirichlet nodes and the CSC layout depend only on the grid and the mode, so they are
    built once; each permittivity then only fills in numbers.
    """

    def __init__(self, p: Problem, odd: bool):
        nx, ny = len(p.x), len(p.y)
        self.p, self.shape = p, (nx, ny)
        idx = np.arange(nx * ny).reshape(nx, ny)
        fixed = np.zeros((nx, ny), dtype=bool)
        fixed[:, 0] = True            # lower plane
        fixed[:, -1] = True           # upper plane or far boundary
        fixed[-1, :] = True           # far side
        if odd:
            fixed[0, :] = True        # odd mode: symmetry plane at 0 V
        fixed |= p.conductor
        self.vals = np.where(p.conductor, 1.0, 0.0).ravel()
        a = np.concatenate([idx[:-1, :].ravel(), idx[:, :-1].ravel()])
        b = np.concatenate([idx[1:, :].ravel(), idx[:, 1:].ravel()])
        n = nx * ny
        free = ~fixed.ravel()
        fmap = -np.ones(n, dtype=np.int64)
        m = int(free.sum())
        fmap[free] = np.arange(m)
        fa, fb = free[a], free[b]
        self.a, self.b, self.n, self.m, self.free = a, b, n, m, free
        self.ad = fa & ~fb          # free a, fixed b
        self.bd = fb & ~fa
        self.rhs_a, self.rhs_b = fmap[a[self.ad]], fmap[b[self.bd]]
        # CSC layout straight from the 5-point stencil: column k (free node g = i ny + j) holds rows
        # g - ny, g - 1, g, g + 1, g + ny where free, already in ascending order; edge ids index c
        g = np.nonzero(free)[0]
        i, j = g // ny, g % ny
        n_ax = (nx - 1) * ny
        nbr = np.stack([g - ny, g - 1, g, g + 1, g + ny], axis=1)
        edge = np.stack([(i - 1) * ny + j, n_ax + i * (ny - 1) + j - 1, -np.ones_like(g),
                         n_ax + i * (ny - 1) + j, i * ny + j], axis=1)
        inside = np.ones_like(nbr, dtype=bool)
        inside[:, 0] = i > 0                      # x = 0 has no left neighbour (j = 0, ny-1, i = nx-1 are fixed)
        valid = inside & free[np.where(inside, nbr, 0)]
        self.indices = fmap[nbr[valid]].astype(np.int32)
        self.indptr = np.concatenate([[0], np.cumsum(valid.sum(axis=1))]).astype(np.int32)
        slot_edge = edge[valid]
        self.off = slot_edge >= 0
        self.off_edge = slot_edge[self.off]
        self.diag_node = g

    def matrix(self, eps: np.ndarray):
        """(K_ff, rhs, c): K_ff phi_f = -K_fd phi_d for the conductor at 1 V; c are the edge couplings."""
        ax, ay = _edge_coefficients(self.p, eps)
        c = np.concatenate([ax.ravel(), ay.ravel()])
        diag = np.bincount(self.a, c, self.n) + np.bincount(self.b, c, self.n)
        data = np.empty(len(self.indices))
        data[self.off] = -c[self.off_edge]
        data[~self.off] = diag[self.diag_node]
        K = sp.csc_matrix((data, self.indices, self.indptr), shape=(self.m, self.m))
        rhs = np.bincount(self.rhs_a, c[self.ad] * self.vals[self.b[self.ad]], self.m)
        rhs += np.bincount(self.rhs_b, c[self.bd] * self.vals[self.a[self.bd]], self.m)
        return K, rhs, c

    def potential(self, phi_f: np.ndarray) -> np.ndarray:
        phi = self.vals.copy()
        phi[self.free] = phi_f
        return phi.reshape(self.shape)

    def energy(self, c: np.ndarray, phi: np.ndarray) -> float:
        f = phi.ravel()
        return float(np.sum(c * (f[self.a] - f[self.b]) ** 2))


class _Factors:
    """LU factors of K (symmetric positive definite, an M-matrix) and the elimination order used.

    A symmetric fill-reducing ordering without pivoting keeps the ordering's sparsity (about twice as
    fast as partial pivoting here). ``order`` (free-node indices in elimination order) reuses an
    ordering found before: the ordering is about a fifth of a factorisation.
    """

    def __init__(self, K, order: np.ndarray | None = None):
        opts = {"SymmetricMode": True}
        if order is None:
            self.lu = splu(K, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options=opts)
            self.order = np.argsort(self.lu.perm_c)
            self.perm = None
        else:
            self.order = self.perm = order
            self.lu = splu(K[order][:, order].tocsc(), permc_spec="NATURAL", diag_pivot_thresh=0.0, options=opts)

    def solve(self, b: np.ndarray) -> np.ndarray:
        if self.perm is None:
            return self.lu.solve(b)
        x = np.empty_like(b)
        x[self.perm] = self.lu.solve(b[self.perm])
        return x


def _factorise(K, order: np.ndarray | None = None) -> _Factors:
    return _Factors(K, order)


def _dot(u: np.ndarray, v: np.ndarray) -> float:
    # elementwise product and sum, not BLAS: a threaded BLAS call on a short vector costs milliseconds
    # when the cores are busy, far more than the arithmetic
    return float(np.sum(u * v))


def _pcg(K, rhs: np.ndarray, lu, x0: np.ndarray, rtol: float = 1e-8, maxiter: int = 60):
    """Conjugate gradients preconditioned by the factors of a nearby matrix (same grid, other eps).

    Air against dielectric: the permittivities differ cell by cell by a factor from 1 to er_max, so
    the preconditioned spectrum lies within [1/er_max, 1] and about ten iterations reach the tolerance
    (the energy's error is its square). Returns None if it does not converge (the caller factorises).
    """
    x = x0.copy()
    r = rhs - K @ x
    tol2 = (rtol * rtol) * (_dot(rhs, rhs) or 1.0)
    z = lu.solve(r)
    d = z.copy()
    rz = _dot(r, z)
    for _ in range(maxiter):
        if _dot(r, r) <= tol2:
            return x
        q = K @ d
        alpha = rz / _dot(d, q)
        x += alpha * d
        r -= alpha * q
        z = lu.solve(r)
        rz_new = _dot(r, z)
        d = z + (rz_new / rz) * d
        rz = rz_new
    return x if _dot(r, r) <= 1e6 * tol2 else None


def solve_energy(p: Problem, eps_override: np.ndarray | None, odd: bool) -> tuple[float, np.ndarray]:
    """Potential with the conductor at 1 V; returns (sum of coefficient * dphi^2, phi)."""
    system = _System(p, odd)
    K, rhs, c = system.matrix(p.eps if eps_override is None else eps_override)
    phi = system.potential(_factorise(K).solve(rhs) if system.m else np.zeros(0))
    return system.energy(c, phi), phi


def loss_tangent_share(p: Problem, phi: np.ndarray) -> float:
    """Capacitance-weighted loss tangent: sum(tand_i W_i) / sum(W_i) over the cells' field energy."""
    if p.tand is None or not np.any(p.tand):
        return 0.0
    dx = np.diff(p.x)[:, None]
    dy = np.diff(p.y)[None, :]
    gx = phi[1:, :] - phi[:-1, :]            # along x, (nx-1, ny)
    gy = phi[:, 1:] - phi[:, :-1]            # along y, (nx, ny-1)
    w = p.eps * ((dy / 2.0 / dx) * (gx[:, :-1] ** 2 + gx[:, 1:] ** 2)
                 + (dx / 2.0 / dy) * (gy[:-1, :] ** 2 + gy[1:, :] ** 2))
    total = float(w.sum())
    return float((w * p.tand).sum()) / total if total > 0 else 0.0


def grid_motion(lay: Layout, p: Problem) -> tuple[np.ndarray, np.ndarray]:
    """Velocity of each grid line under Wheeler's recession (per unit n), piecewise linear between walls."""
    def interp(lines, anchors):
        pts = dict(sorted(anchors))
        return np.interp(lines, np.fromiter(pts.keys(), float), np.fromiter(pts.values(), float))
    return interp(p.x, lay.x_motion), interp(p.y, lay.y_motion)


def energy_rate(p: Problem, eps: np.ndarray, phi: np.ndarray, vx: np.ndarray, vy: np.ndarray) -> float:
    """dW/dn of the discrete energy W = sum c (dphi)^2 when the grid lines move with velocities (vx, vy).

    phi minimises W over the free nodes, so the total derivative equals the partial one at fixed phi
    (no second solve): each coupling c = eps * face / length changes with its cell's width and height.
    This is Wheeler's incremental rule differentiated on one grid: the same mesh, deformed, rather
    than two separately meshed, receded geometries.
    """
    dx, dy = np.diff(p.x), np.diff(p.y)
    rx, ry = np.diff(vx), np.diff(vy)
    fx, fy = _faces(eps, dx, dy)
    fx_rate, fy_rate = _faces(eps, rx, ry)
    # c = face / length: dc = dface / length - c * dlength / length
    dax = (fx_rate - fx * (rx / dx)[:, None]) / dx[:, None]
    day = (fy_rate - fy * (ry / dy)[None, :]) / dy[None, :]
    gx = phi[1:, :] - phi[:-1, :]
    gy = phi[:, 1:] - phi[:, :-1]
    return float(np.sum(dax * gx * gx) + np.sum(day * gy * gy))


def _mode_energies(lay: Layout, p: Problem, name: str, odd: bool, homogeneous: bool, rate: bool,
                  reuse: dict | None = None) -> dict:
    """One mode on one grid: energy in its dielectric and in air, loss-tangent share and, with ``rate``,
    dW_air/dn under Wheeler's recession (energy_rate).

    ``reuse`` carries the elimination order between the modes of one grid: the odd mode's free nodes
    are the even mode's less the symmetry plane, and an order restricted to a subset of the nodes
    fills in no more than the whole (the filled graph of a principal submatrix is a subgraph).
    """
    air = np.ones_like(p.eps)
    system = _System(p, odd)
    K, rhs, c = system.matrix(p.eps)
    order = None
    if reuse is not None and "order" in reuse:
        prev_nodes, prev_order = reuse["nodes"], reuse["order"]
        pos = -np.ones(system.n, dtype=np.int64)
        pos[system.diag_node] = np.arange(system.m)
        seq = pos[prev_nodes[prev_order]]
        order = seq[seq >= 0]
        if len(order) != system.m:
            order = None                                  # not a subset: find a fresh ordering
    lu = _factorise(K, order)
    if reuse is not None:
        reuse["nodes"], reuse["order"] = system.diag_node, lu.order
    phi_f = lu.solve(rhs)
    phi = system.potential(phi_f)
    out = {name: system.energy(c, phi), name + "_tand": loss_tangent_share(p, phi)}
    phi_air = phi
    if not homogeneous:
        # the air problem has the same grid and pattern: the dielectric factors precondition it
        Ka, rhsa, ca = system.matrix(air)
        phia_f = _pcg(Ka, rhsa, lu, phi_f)
        if phia_f is None:
            phia_f = _factorise(Ka).solve(rhsa)
        phi_air = system.potential(phia_f)
        out[name + "_air"] = system.energy(ca, phi_air)
    if rate:
        vx, vy = grid_motion(lay, p)
        out["rate_air"] = energy_rate(p, air, phi_air, vx, vy)
    return out


def _capacitances(lay: Layout, levels: list[int], coupled: bool, homogeneous: bool, rate: bool = False
                  ) -> list[dict[str, float]]:
    """Capacitances per length of the given grid levels: each mode in its dielectric and in air
    (F/m), the loss-tangent share and, with ``rate``, dC_air/dn of the signal mode (odd for a pair).

    Every (level, mode) is an independent solve, and SuperLU releases the GIL: two threads share
    them, the largest first.
    """
    modes = [("even", False), ("odd", True)] if coupled else [("single", False)]
    signal = "odd" if coupled else "single"
    factor = 1.0 if coupled else 2.0     # single trace: the half domain holds half the energy
    grids = {k: discretise(lay, k) for k in levels}
    jobs = sorted(levels, reverse=True)

    def run(k):
        # the modes of one grid in turn: the odd mode reuses the even mode's elimination order
        reuse: dict = {}
        out: dict[str, float] = {}
        for name, odd in modes:
            out.update(_mode_energies(lay, grids[k], name, odd, homogeneous, rate and name == signal, reuse))
        return out

    def run_mode(mode):
        name, odd = mode
        return _mode_energies(lay, grids[jobs[0]], name, odd, homogeneous, rate and name == signal)
    if len(jobs) > 1:
        with ThreadPoolExecutor(max_workers=2) as pool:
            parts = list(pool.map(run, jobs))
    elif len(modes) > 1:
        # one more level of a pair: its two modes side by side rather than one after the other
        with ThreadPoolExecutor(max_workers=2) as pool:
            parts = [{k: v for part in pool.map(run_mode, modes) for k, v in part.items()}]
    else:
        parts = [run(jobs[0])]
    outs = []
    for k in levels:
        out = dict(parts[jobs.index(k)])
        if homogeneous:
            er = float(grids[k].eps.flat[0])
            for name, _ in modes:
                out[name + "_air"] = out[name] / er
        for key in list(out):
            if not key.endswith("_tand"):
                out[key] *= EPS0 * factor          # energies to capacitances (and dC/dn)
        out["cells"] = float(grids[k].eps.size)
        outs.append(out)
    return outs


def _richardson(c0: float, c1: float, c2: float) -> tuple[float, float]:
    """Extrapolated value and GCI-style relative uncertainty from three levels (ratio sqrt 2)."""
    d1, d2 = c1 - c0, c2 - c1
    if d1 != 0 and d2 != 0 and d1 * d2 > 0 and abs(d2) < abs(d1):
        p = math.log(abs(d1 / d2)) / math.log(RATIO)
        p = min(max(p, 0.5), 4.0)
        ext = c2 + d2 / (RATIO**p - 1.0)
        return ext, GCI_SAFETY * abs(ext - c2) / abs(ext)
    # not in the asymptotic range (or converged to round-off): finest value, spread as the error
    spread = max(abs(d1), abs(d2))
    return c2, 3.0 * spread / abs(c2) if spread > 1e-12 * abs(c2) else 1e-6


def solve_field(xs: CrossSection, target_pct: float = DEFAULT_TARGET_PCT, max_level: int = 6,
                loss: bool = True) -> LineResult:
    """Field-solved line parameters with an uncertainty estimate (see module doc).

    With ``loss``, also Wheeler's dZ_air/dn of the signal mode (Zodd for a pair) from the same air
    solutions (energy_rate), Richardson-extrapolated over the same levels, with its own uncertainty;
    levels are added until it is within LOSS_TARGET_PCT too.
    """
    t0 = time.perf_counter()
    lay = layout_of(xs)
    ers = {s.er for s in xs.below} | {s.er for s in xs.above}
    # one permittivity everywhere: a stripline in one dielectric, or any line in air
    homogeneous = len(ers) == 1 and (xs.kind == "stripline" or ers == {1.0})
    coupled = xs.coupled
    # a pair also reports its isolated line's Z0 (no loss needed): solve that alongside
    single_job = ThreadPoolExecutor(max_workers=1) if coupled else None
    single_future = (single_job.submit(solve_field, xs.single(), target_pct, max_level, False)
                     if coupled else None)
    levels = _capacitances(lay, [0, 1, 2], coupled, homogeneous, loss)
    keys = ("even", "even_air", "odd", "odd_air") if coupled else ("single", "single_air")
    signal = "odd" if coupled else "single"

    def dz_air_dn(lv):
        # Z_air = 1 / (c C_air): dZ_air/dn = -dC_air/dn / (c C_air^2)
        return -lv["rate_air"] / (C0 * lv[signal + "_air"] ** 2)

    level = 2
    while True:
        ext = {}
        unc = {}
        for k in keys:
            ext[k], unc[k] = _richardson(levels[-3][k], levels[-2][k], levels[-1][k])
        # Z ~ 1/sqrt(C Ca): half the sum of the two relative uncertainties
        z_unc = max(0.5 * (unc[m] + unc[m + "_air"]) for m in (("even", "odd") if coupled else ("single",)))
        if loss:
            dz, dz_unc = _richardson(*(dz_air_dn(lv) for lv in levels[-3:]))
            # alpha_c ~ dZ_air/dn / Z0: the two relative uncertainties add
            loss_unc = dz_unc + z_unc
        if (z_unc * 100.0 <= target_pct and (not loss or loss_unc * 100.0 <= LOSS_TARGET_PCT)) \
                or level >= max_level:
            break
        level += 1
        levels += _capacitances(lay, [level], coupled, homogeneous, loss)

    def z_and_eps(m):
        c, ca = ext[m], ext[m + "_air"]
        if homogeneous:
            ca = c / float(next(iter(ers)))
        return 1.0 / (C0 * math.sqrt(c * ca)), c / ca

    warnings = []
    if z_unc * 100.0 > target_pct:
        warnings.append(f"field solution uncertainty {z_unc * 100:.2f} % is above the {target_pct:g} % target")
    if loss and loss_unc * 100.0 > LOSS_TARGET_PCT:
        warnings.append(f"conductor-loss uncertainty {loss_unc * 100:.1f} % is above the {LOSS_TARGET_PCT:g} % "
                        "target")
    tands = {m: levels[-1].get(m + "_tand", 0.0) for m in (("even", "odd") if coupled else ("single",))}
    if coupled:
        ze, ee = z_and_eps("even")
        zo, eo = z_and_eps("odd")
        single = single_future.result()
        single_job.shutdown()
        res = LineResult(z0=single.z0, eps_eff=single.eps_eff, model="field-2d", z_even=ze, z_odd=zo,
                         eps_even=ee, eps_odd=eo, uncertainty_pct=max(z_unc * 100.0, single.uncertainty_pct),
                         warnings=warnings + single.warnings)
        res.tand_eff, res.tand_even, res.tand_odd = single.tand_eff, tands["even"], tands["odd"]
        res.c_matrix = _pair_matrix(ext["even"], ext["odd"])
        res.l_matrix = _l_matrix(ext["even_air"], ext["odd_air"], homogeneous, ext)
    else:
        z, e = z_and_eps("single")
        res = LineResult(z0=z, eps_eff=e, model="field-2d", uncertainty_pct=z_unc * 100.0, warnings=warnings,
                         tand_eff=tands["single"])
    if loss:
        res.dz_air_dn, res.loss_uncertainty_pct = dz, loss_unc * 100.0
    res.solve_s = time.perf_counter() - t0
    res.levels = level + 1
    return res


SENSITIVITY_LEVEL = 0     # grid level of the fixed-grid solves that give the fabrication band's ratios


def fixed_grid_impedance(xs: CrossSection, level: int = SENSITIVITY_LEVEL) -> LineResult:
    """Z0 (a pair: its isolated line's Z0 and the even and odd modes) on one grid level, not extrapolated.

    For ratios of nearby cross-sections, Z(p + dp) / Z(p), as the fabrication band takes them: the grid's
    error is nearly the same on both and cancels in the ratio. On the 12 cross-sections of the KS-4 benchmark
    board (microstrip with a thin mask, stripline, pairs of both) and on the demo board, band edges from
    level-0 ratios times the extrapolated nominal are within 0.1 % of edges from extrapolated solves of every
    limit, at about an eighth of the cost (tests/test_fab_band.py allows 0.15 %). ``uncertainty_pct`` is not
    estimated here (NaN): use the ratio only.
    """
    lay = layout_of(xs)
    ers = {s.er for s in xs.below} | {s.er for s in xs.above}
    homogeneous = len(ers) == 1 and (xs.kind == "stripline" or ers == {1.0})
    lv = _capacitances(lay, [level], xs.coupled, homogeneous)[0]

    def z(m):
        c, ca = lv[m], lv[m + "_air"]
        if homogeneous:
            ca = c / float(next(iter(ers)))
        return 1.0 / (C0 * math.sqrt(c * ca)), c / ca

    if xs.coupled:
        single = fixed_grid_impedance(xs.single(), level)
        (ze, ee), (zo, eo) = z("even"), z("odd")
        return LineResult(z0=single.z0, eps_eff=single.eps_eff, model="field-2d fixed grid", z_even=ze, z_odd=zo,
                          eps_even=ee, eps_odd=eo, uncertainty_pct=float("nan"))
    z0, e = z("single")
    return LineResult(z0=z0, eps_eff=e, model="field-2d fixed grid", uncertainty_pct=float("nan"))


def _pair_matrix(ce: float, co: float) -> list[list[float]]:
    """Maxwell capacitance matrix of a symmetric pair from its mode capacitances."""
    c11 = 0.5 * (ce + co)
    c12 = 0.5 * (ce - co)
    return [[c11, c12], [c12, c11]]


def _l_matrix(cea: float, coa: float, homogeneous: bool, ext: dict) -> list[list[float]]:
    """Inductance matrix L = mu0 eps0 inv(C_air)."""
    if homogeneous:
        cea, coa = ext["even_air"], ext["odd_air"]
    ca = np.array(_pair_matrix(cea, coa))
    return (np.linalg.inv(ca) / (C0 * C0)).tolist()


def potential_for_plot(xs: CrossSection, level: int = 1, odd: bool = False):
    """Full-width grid and potential (mirrored), for drawing equipotentials."""
    lay = layout_of(xs)
    p = discretise(lay, level)
    _, phi = solve_energy(p, None, odd and xs.coupled)
    x = np.concatenate([-p.x[:0:-1], p.x])
    sign = -1.0 if (odd and xs.coupled) else 1.0
    phi_full = np.concatenate([sign * phi[:0:-1, :], phi], axis=0)
    return x, p.y, phi_full, lay, p


def current_integral_resistance(xs: CrossSection, level: int = 4) -> float:
    """R / Rs [1/m] of the signal mode from the air solution's surface current (J = c sigma).

    An independent check of Wheeler's rule: R = Rs * sum(J^2 dl) / I^2 over every conductor
    surface (trace and planes), with sigma from the discrete flux through each conductor face.
    """
    from dataclasses import replace as _replace
    air = _replace(xs, below=tuple(_replace(s, er=1.0) for s in xs.below),
                   above=tuple(_replace(s, er=1.0) for s in xs.above))
    lay = layout_of(air)
    p = discretise(lay, level)
    ones = np.ones_like(p.eps)
    _, phi = solve_energy(p, ones, odd=xs.coupled)
    ax, ay = _edge_coefficients(Problem(p.x, p.y, ones, p.conductor))
    cond = p.conductor
    dx, dy = np.diff(p.x), np.diff(p.y)
    fy = np.zeros(len(p.y))
    fy[1:] += dy / 2.0
    fy[:-1] += dy / 2.0
    fx = np.zeros(len(p.x))
    fx[1:] += dx / 2.0
    fx[:-1] += dx / 2.0
    # trace faces: edges joining a trace node to a free node
    hx = cond[:-1, :] != cond[1:, :]
    flux_x = ax * np.abs(phi[:-1, :] - phi[1:, :])
    hy = cond[:, :-1] != cond[:, 1:]
    flux_y = ay * np.abs(phi[:, :-1] - phi[:, 1:])
    face_x = np.broadcast_to(fy[None, :], flux_x.shape)
    face_y = np.broadcast_to(fx[:, None], flux_y.shape)
    s_trace = float((flux_x[hx] ** 2 / face_x[hx]).sum() + (flux_y[hy] ** 2 / face_y[hy]).sum())
    q = float(flux_x[hx].sum() + flux_y[hy].sum())
    # plane surfaces: the lower plane (and the upper one of a stripline)
    s_planes = float((flux_y[:, 0][~cond[:, 1]] ** 2 / fx[~cond[:, 1]]).sum())
    if not lay.open_top:
        s_planes += float((flux_y[:, -1][~cond[:, -2]] ** 2 / fx[~cond[:, -2]]).sum())
    # half domain: both sums double in the full cross-section, the current too
    return 2.0 * (s_trace + s_planes) / (2.0 * q) ** 2
