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
    return Layout([cond], trap, diel, float(y_top), float(x_far), open_top, sorted(set(x_keys)),
                  sorted(set(y_keys)), x_fine, y_fine, d_fine, scale)


def graded_axis(lo: float, hi: float, keys: list[float], fine: list[float], d0: float, growth: float,
                d_max: float) -> np.ndarray:
    """Grid lines from lo to hi through every key; spacing d0 at `fine` points, growing linearly."""
    keys = sorted({k for k in keys if lo <= k <= hi} | {lo, hi})
    fine_arr = np.asarray(fine if fine else [lo], dtype=float)

    def size(p):
        return min(d_max, d0 + growth * float(np.min(np.abs(fine_arr - p))))

    pts = [keys[0]]
    for a, b in zip(keys[:-1], keys[1:]):
        if b - a <= 0:
            continue
        marks = [a]
        p = a
        while True:
            step = size(p)
            if p + step >= b - 0.3 * size(b):
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


def _edge_coefficients(p: Problem):
    dx = np.diff(p.x)
    dy = np.diff(p.y)
    nx, ny = len(p.x), len(p.y)
    # horizontal edges (i,j)-(i+1,j): dual face from half the cell below and half above
    ax = np.zeros((nx - 1, ny))
    ax[:, :-1] += p.eps * dy[None, :] / 2.0
    ax[:, 1:] += p.eps * dy[None, :] / 2.0
    ax /= dx[:, None]
    ay = np.zeros((nx, ny - 1))
    ay[:-1, :] += p.eps * dx[:, None] / 2.0
    ay[1:, :] += p.eps * dx[:, None] / 2.0
    ay /= dy[None, :]
    return ax, ay


def solve_energy(p: Problem, eps_override: np.ndarray | None, odd: bool) -> tuple[float, np.ndarray]:
    """Potential with the conductor at 1 V; returns (sum of coefficient * dphi^2, phi)."""
    prob = p if eps_override is None else Problem(p.x, p.y, eps_override, p.conductor, p.tand)
    ax, ay = _edge_coefficients(prob)
    nx, ny = len(p.x), len(p.y)
    idx = np.arange(nx * ny).reshape(nx, ny)
    fixed = np.zeros((nx, ny), dtype=bool)
    fixed[:, 0] = True            # lower plane
    fixed[:, -1] = True           # upper plane or far boundary
    fixed[-1, :] = True           # far side
    if odd:
        fixed[0, :] = True        # odd mode: symmetry plane at 0 V
    fixed |= p.conductor
    value = np.where(p.conductor, 1.0, 0.0)

    a = np.concatenate([idx[:-1, :].ravel(), idx[:, :-1].ravel()])
    b = np.concatenate([idx[1:, :].ravel(), idx[:, 1:].ravel()])
    c = np.concatenate([ax.ravel(), ay.ravel()])
    n = nx * ny
    diag = np.bincount(a, c, n) + np.bincount(b, c, n)
    free = ~fixed.ravel()
    fmap = -np.ones(n, dtype=np.int64)
    fmap[free] = np.arange(int(free.sum()))
    vals = value.ravel()
    # K_ff phi_f = -K_fd phi_d
    fa, fb = free[a], free[b]
    both = fa & fb
    rows = np.concatenate([fmap[a[both]], fmap[b[both]], fmap[np.nonzero(free)[0]]])
    cols = np.concatenate([fmap[b[both]], fmap[a[both]], fmap[np.nonzero(free)[0]]])
    data = np.concatenate([-c[both], -c[both], diag[free]])
    m = int(free.sum())
    K = sp.csc_matrix((data, (rows, cols)), shape=(m, m))
    rhs = np.zeros(m)
    ad = fa & ~fb      # free a, fixed b
    np.add.at(rhs, fmap[a[ad]], c[ad] * vals[b[ad]])
    bd = fb & ~fa
    np.add.at(rhs, fmap[b[bd]], c[bd] * vals[a[bd]])
    phi = vals.copy()
    if m:
        phi[free] = splu(K, permc_spec="MMD_AT_PLUS_A").solve(rhs)   # SPD: symmetric ordering
    energy = float(np.sum(c * (phi[a] - phi[b]) ** 2))
    return energy, phi.reshape(nx, ny)


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


def _capacitances(lay: Layout, level: int, coupled: bool, homogeneous: bool) -> dict[str, float]:
    p = discretise(lay, level)
    air = np.ones_like(p.eps)
    modes = [("even", False), ("odd", True)] if coupled else [("single", False)]
    factor = 1.0 if coupled else 2.0     # single trace: the half domain holds half the energy
    jobs = []
    for name, odd in modes:
        jobs.append((name, None, odd))
        if not homogeneous:
            jobs.append((name + "_air", air, odd))
    # The factorisations are independent and SuperLU releases the GIL: two threads overlap them.
    def job(j):
        e, phi = solve_energy(p, j[1], j[2])
        return e, (loss_tangent_share(p, phi) if j[1] is None else 0.0)
    if len(jobs) > 1:
        with ThreadPoolExecutor(max_workers=2) as pool:
            results = list(pool.map(job, jobs))
    else:
        results = [job(jobs[0])]
    out = {name: EPS0 * factor * e for (name, _, _), (e, _) in zip(jobs, results)}
    for (name, ov, _), (_, td) in zip(jobs, results):
        if ov is None:
            out[name + "_tand"] = td
    if homogeneous:
        er = float(p.eps.flat[0])
        for name, _ in modes:
            out[name + "_air"] = out[name] / er
    out["cells"] = float(p.eps.size)
    return out


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


def solve_field(xs: CrossSection, target_pct: float = DEFAULT_TARGET_PCT, max_level: int = 6) -> LineResult:
    """Field-solved line parameters with an uncertainty estimate (see module doc)."""
    t0 = time.perf_counter()
    lay = layout_of(xs)
    ers = {s.er for s in xs.below} | {s.er for s in xs.above}
    # one permittivity everywhere: a stripline in one dielectric, or any line in air
    homogeneous = len(ers) == 1 and (xs.kind == "stripline" or ers == {1.0})
    coupled = xs.coupled
    # a pair also reports its isolated line's Z0: solve that alongside
    single_job = ThreadPoolExecutor(max_workers=1) if coupled else None
    single_future = single_job.submit(solve_field, xs.single(), target_pct, max_level) if coupled else None
    levels = [_capacitances(lay, k, coupled, homogeneous) for k in range(3)]
    keys = ("even", "even_air", "odd", "odd_air") if coupled else ("single", "single_air")
    level = 2
    while True:
        ext = {}
        unc = {}
        for k in keys:
            ext[k], unc[k] = _richardson(levels[-3][k], levels[-2][k], levels[-1][k])
        # Z ~ 1/sqrt(C Ca): half the sum of the two relative uncertainties
        z_unc = max(0.5 * (unc[m] + unc[m + "_air"]) for m in (("even", "odd") if coupled else ("single",)))
        if z_unc * 100.0 <= target_pct or level >= max_level:
            break
        level += 1
        levels.append(_capacitances(lay, level, coupled, homogeneous))

    def z_and_eps(m):
        c, ca = ext[m], ext[m + "_air"]
        if homogeneous:
            ca = c / float(next(iter(ers)))
        return 1.0 / (C0 * math.sqrt(c * ca)), c / ca

    warnings = []
    if z_unc * 100.0 > target_pct:
        warnings.append(f"field solution uncertainty {z_unc * 100:.2f} % is above the {target_pct:g} % target")
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
    res.solve_s = time.perf_counter() - t0
    res.levels = level + 1
    return res


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
