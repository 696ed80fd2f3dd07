"""Field-solving a board's cross-sections: disk cache, both cores, progress.

The physics is in sicheck.physics.field2d; this module only decides what to solve,
where results are kept and how work is spread (processes: $SICHECK_WORKERS, default the
number of cores up to 4). The cache lives in
$SICHECK_CACHE_DIR, else $XDG_CACHE_HOME/sicheck, else ~/.cache/sicheck, one JSON file
per cross-section keyed by a hash of its exact geometry and the solver settings.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import os
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path
from typing import Callable

from sicheck.physics import field2d
from sicheck.physics.cross_section import CrossSection
from sicheck.physics.formula import solve_formula
from sicheck.physics.line_result import LineResult

SOLVER_VERSION = "field2d-3"
AUTO_FIELD_LIMIT = 400      # 'auto' field-solves boards with up to this many unique cross-sections
_FIELDS = ("z0", "eps_eff", "model", "z_even", "z_odd", "eps_even", "eps_odd", "uncertainty_pct", "solve_s",
           "warnings", "c_matrix", "l_matrix", "levels", "tand_eff", "tand_even", "tand_odd", "dz_air_dn",
           "loss_uncertainty_pct")


def cache_dir() -> Path:
    if os.environ.get("SICHECK_CACHE_DIR"):
        return Path(os.environ["SICHECK_CACHE_DIR"])
    base = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    return Path(base) / "sicheck"


def cache_key(xs: CrossSection, target_pct: float | int) -> str:
    """The cache file's name: the cross-section, the solver's version and its setting (an extrapolated solve's
    target in %, a float; a fixed-grid solve's level, an int)."""
    setting = {"target": target_pct} if isinstance(target_pct, float) else {"fixed_grid_level": target_pct}
    payload = json.dumps({"xs": dataclasses.asdict(xs), "v": SOLVER_VERSION, **setting}, sort_keys=True)
    return hashlib.sha256(payload.encode()).hexdigest()[:32]


def _to_json(r: LineResult) -> dict:
    return {k: getattr(r, k) for k in _FIELDS}


def _from_json(d: dict) -> LineResult:
    return LineResult(**{k: d.get(k) for k in _FIELDS if k != "warnings"}, warnings=list(d.get("warnings") or []))


def _load(path: Path) -> LineResult | None:
    try:
        return _from_json(json.loads(path.read_text()))
    except (OSError, ValueError, TypeError):
        return None     # missing or damaged entry: solve again


def _store(path: Path, r: LineResult) -> None:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_suffix(f".{os.getpid()}.tmp")
        tmp.write_text(json.dumps(_to_json(r)))
        os.replace(tmp, path)
    except OSError:
        pass            # a read-only cache only costs time


def _solve_one(args) -> LineResult:
    xs, target = args
    return field2d.solve_field(xs, target)


def _in_parallel(fn, args: list, keys: list, workers: int | None):
    """(key, fn(arg)) for each, over a process pool of $SICHECK_WORKERS or the CPUs (at most 4) from three jobs
    up; the slowest first (pairs solve four fields and their isolated line; open microstrip has the larger
    grid), so that no worker is left with a long job at the end."""
    if workers is None and os.environ.get("SICHECK_WORKERS", "").isdigit():
        workers = int(os.environ["SICHECK_WORKERS"])
    n_workers = workers if workers is not None else min(os.cpu_count() or 1, 4)
    order = sorted(range(len(args)), key=lambda k: (not args[k][0].coupled, args[k][0].kind != "microstrip"))
    jobs = [args[k] for k in order]
    if len(jobs) >= 3 and n_workers > 1:
        with ProcessPoolExecutor(max_workers=n_workers) as pool:
            yield from zip((keys[k] for k in order), pool.map(fn, jobs))
    else:
        for k, a in zip(order, jobs):
            yield keys[k], fn(a)


def _fixed_grid_one(args) -> LineResult:
    xs, level = args
    return field2d.fixed_grid_impedance(xs, level)


def _cached_solves(xs_list: list[CrossSection], fn, setting, use_cache: bool, progress, workers) -> list[LineResult]:
    """fn((xs, setting)) for each cross-section, from the cache where it holds one (keyed by the setting)."""
    results: list[LineResult | None] = [None] * len(xs_list)
    todo = []
    cdir = cache_dir()
    for i, xs in enumerate(xs_list):
        if use_cache:
            hit = _load(cdir / f"{cache_key(xs, setting)}.json")
            if hit is not None:
                results[i] = hit
                continue
        todo.append(i)
    done = len(xs_list) - len(todo)
    if progress:
        progress(done, len(xs_list))
    for i, r in _in_parallel(fn, [(xs_list[i], setting) for i in todo], todo, workers):
        results[i] = r
        done += 1
        if progress:
            progress(done, len(xs_list))
    for i in todo:
        if use_cache:
            _store(cdir / f"{cache_key(xs_list[i], setting)}.json", results[i])
    return results


def fixed_grid_all(xs_list: list[CrossSection], level: int = field2d.SENSITIVITY_LEVEL, use_cache: bool = True,
                   workers: int | None = None) -> list[LineResult]:
    """field2d.fixed_grid_impedance of each cross-section (same order), in parallel, cached."""
    return _cached_solves(xs_list, _fixed_grid_one, level, use_cache, None, workers)


def solve_field_all(xs_list: list[CrossSection], target_pct: float = field2d.DEFAULT_TARGET_PCT,
                    use_cache: bool = True, progress: Callable[[int, int], None] | None = None,
                    workers: int | None = None) -> list[LineResult]:
    """Field results for each cross-section (same order), with the closed form beside them."""
    formula = solve_formula(xs_list)
    results = _cached_solves(xs_list, _solve_one, target_pct, use_cache, progress, workers)
    out = []
    for r, f in zip(results, formula):
        r.formula_z0 = f.z0
        r.formula_zdiff = f.zdiff
        r.formula_warnings = f.warnings
        out.append(r)
    return out
