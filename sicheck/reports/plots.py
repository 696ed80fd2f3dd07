"""Pictures: the solved cross-section with its equipotentials (matplotlib, no screen)."""

from __future__ import annotations

from pathlib import Path

from sicheck.physics.cross_section import CrossSection
from sicheck.physics.line_result import LineResult
from sicheck.reports.atomic import atomic_path


def plot_cross_section(xs: CrossSection, r: LineResult, target: str | Path) -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    from sicheck.physics.field2d import potential_for_plot
    x, y, phi, lay, prob = potential_for_plot(xs, level=1, odd=xs.coupled)
    span = max(lay.scale * 4.0, (xs.width + (xs.gap or 0)) * 1.5)
    ytop = lay.y_top if not lay.open_top else max(lay.y_keys) + span * 0.6
    fig, ax = plt.subplots(figsize=(8, 4.2), dpi=120)
    # dielectrics as a colour map of er
    xc = np.concatenate([-prob.x[:0:-1], prob.x])
    eps_full = np.concatenate([prob.eps[::-1, :], prob.eps], axis=0)
    ax.pcolormesh(xc * 1e3, prob.y * 1e3, eps_full.T, cmap="Greens", alpha=0.35, shading="flat",
                  vmin=1.0, vmax=max(2.0, float(eps_full.max())))
    levels = np.linspace(-0.95, 0.95, 20) if xs.coupled else np.linspace(0.05, 0.95, 19)
    ax.contour(x * 1e3, y * 1e3, phi.T, levels=levels, colors="tab:blue", linewidths=0.7)
    cond = np.concatenate([prob.conductor[:0:-1, :], prob.conductor], axis=0)
    ax.contourf(x * 1e3, y * 1e3, cond.T.astype(float), levels=[0.5, 1.5], colors=["#b87333"])
    ax.axhline(0.0, color="#b87333", linewidth=3)
    if not lay.open_top:
        ax.axhline(lay.y_top * 1e3, color="#b87333", linewidth=3)
    ax.set_xlim(-span * 1e3, span * 1e3)
    ax.set_ylim(-0.02 * ytop * 1e3, ytop * 1e3 * 1.02)
    ax.set_xlabel("x [mm]")
    ax.set_ylabel("y [mm]")
    if xs.coupled:
        title = (f"{xs.kind} pair (odd mode shown): Zdiff {r.zdiff:.1f} ohm, Zodd {r.z_odd:.1f}, "
                 f"Zeven {r.z_even:.1f} ohm")
    else:
        title = f"{xs.kind}: Z0 {r.z0:.1f} ohm, eps_eff {r.eps_eff:.3f}"
    if r.uncertainty_pct is not None:
        title += f"  (+/-{r.uncertainty_pct:.2f} %)"
    ax.set_title(title, fontsize=9)
    ax.set_aspect("equal", adjustable="box")
    fig.tight_layout()
    target = Path(target)
    with atomic_path(target) as tmp:
        fig.savefig(tmp, format="png")
    plt.close(fig)


def plot_waveform(wf, target: str | Path) -> None:
    """Source and receiver voltages of one simulation, with the settling band."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(8, 4), dpi=120)
    t = wf.t * 1e9
    ax.plot(t, wf.v_src, color="tab:gray", linewidth=1.0, label="driver end")
    ax.plot(t, wf.v_rx, color="tab:blue", linewidth=1.4, label="receiver")
    vf = wf.v_final
    ax.axhspan(vf * 0.95, vf * 1.05, color="tab:green", alpha=0.12, label="v_final +/-5 %")
    m = wf.metrics
    ax.set_title(f"overshoot {m['overshoot_pct']:.1f} %, ringback {m['ringback']:.3g} V, settled {m['settle_ns']:.2f} ns,"
                 f" flight {m['flight_ns']:.3f} ns", fontsize=9)
    ax.set_xlabel("t [ns]")
    ax.set_ylabel("V")
    ax.legend(fontsize=8, loc="lower right")
    ax.grid(alpha=0.3)
    fig.tight_layout()
    with atomic_path(Path(target)) as tmp:
        fig.savefig(tmp, format="png")
    plt.close(fig)
