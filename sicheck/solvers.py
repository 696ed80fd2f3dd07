"""Choosing the impedance solver for a command: closed forms, the field solver, or 'auto'."""

from __future__ import annotations

import sys

from sicheck.errors import InputError

SOLVERS = ("auto", "formula", "field")


def _err_console():
    from rich.console import Console
    return Console(stderr=True, highlight=False)


def solver_fn(name: str, no_cache: bool = False, show_progress: bool = True):
    """The function that solves a list of unique cross-sections for the chosen solver."""
    from sicheck.physics.formula import solve_formula
    if name not in SOLVERS:
        raise InputError(f"--solver must be one of {', '.join(SOLVERS)} (got '{name}')")
    if name == "formula":
        return solve_formula

    chosen: dict[str, bool] = {}

    def field(xs_list):
        from sicheck.field_solve import AUTO_FIELD_LIMIT, solve_field_all
        if name == "auto":
            # the first call (a board's nominal cross-sections) decides for the whole command, so that the
            # fabrication band's and the loss's extra solves use the nominal's solver
            if "closed" not in chosen:
                chosen["closed"] = len(xs_list) > AUTO_FIELD_LIMIT
                if chosen["closed"]:
                    _err_console().print(f"{len(xs_list)} unique cross-sections: more than {AUTO_FIELD_LIMIT}, so "
                                         "'auto' uses the closed forms (use --solver field to force the field solver)")
            if chosen["closed"]:
                return solve_formula(xs_list)
        if not show_progress or not sys.stderr.isatty():     # a bar in a log or a pipe is only noise
            return solve_field_all(xs_list, use_cache=not no_cache)
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
        with Progress(TextColumn("field-solving cross-sections"), BarColumn(), MofNCompleteColumn(),
                      TimeElapsedColumn(), console=_err_console(), transient=True) as bar:
            task = bar.add_task("solve", total=len(xs_list))
            return solve_field_all(xs_list, use_cache=not no_cache,
                                   progress=lambda done, total: bar.update(task, completed=done))
    def band_ratios(xs_list):
        """The fabrication band's ratio solve (physics/fab_band.py): the field solver on one fixed grid,
        or the closed forms when 'auto' chose them."""
        if chosen.get("closed"):
            return solve_formula(xs_list)
        from sicheck.field_solve import fixed_grid_all
        return fixed_grid_all(xs_list, use_cache=not no_cache)

    field.band_ratios = band_ratios
    return field
