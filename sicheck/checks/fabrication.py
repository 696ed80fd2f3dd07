"""Fabrication checks: features the board shop can make."""

from __future__ import annotations

import numpy as np

from sicheck.checks.engine import Param, check, make_key, pair_id, pair_label, setting

MIN_FEATURE = Param("min_feature", "length", 75e-6, "mm", "narrowest trace or gap accepted (common practice, "
                    "3 mil)", section="fabrication", hi=0.1, scale=1e3)
MAX_WIDTH = setting(Param("max_width", "length", 2e-3, "mm", "widest trace `sicheck plan` proposes",
                          section="fabrication", hi=0.1, scale=1e3))


@check("min-feature", "error", params=(MIN_FEATURE,))
def min_feature(ctx, chk):
    """Trace width or pair gap below the fabrication minimum feature size.

    What it checks: the width of every segment and the gap of every pair segment against `min_feature`
    (a pair is reported once).
    Why it matters: features below what the fabricator etches reliably come out narrower, open or
    shorted, and their impedance is far from the computed value.
    How to fix: widen the trace or the gap (and re-plan the layer with `sicheck plan`), or confirm a
    finer process with the fabricator and lower `min_feature`.
    """
    seg = ctx.segments
    wmin = ctx.param("min_feature")
    is_pair = (seg["pair"] != "").to_numpy()
    w = seg["width"].to_numpy(float)
    g = seg["gap"].to_numpy(float)
    narrow_w = w < wmin * (1 - 1e-9)
    narrow_g = is_pair & (g < wmin * (1 - 1e-9))
    seen: set = set()
    for i in np.nonzero(narrow_w | narrow_g)[0]:
        net, layer = seg["net"].iat[i], seg["layer"].iat[i]
        what, size = ("width", w[i]) if narrow_w[i] else ("gap", g[i])
        if is_pair[i]:
            ident, label = pair_id(net, seg["pair"].iat[i]), pair_label(net, seg["pair"].iat[i])
            once = (ident, layer, w[i], g[i])
            if once in seen:      # the pair listed on both legs: once
                continue
            seen.add(once)
        else:
            ident = label = net
        yield chk.finding(label, layer, f"{what} {size * 1e3:.3f} mm is below the minimum feature "
                                        f"{wmin * 1e3:.3f} mm",
                          row=int(seg["row"].iat[i]), key=make_key(chk.id, ident, layer, f"{what}{size * 1e3:.3f}mm"),
                          value=float(size * 1e3), limit=float(wmin * 1e3), unit="mm")
