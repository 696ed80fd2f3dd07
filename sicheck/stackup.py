"""Reading a stackup file (TOML) and deriving each signal layer's cross-section.

Geometry convention: layers are listed top to bottom; a dielectric's thickness is the
distance between the facing copper surfaces of its neighbours. A signal layer's
references are the nearest ``plane`` layers above and below it. One reference: a
microstrip (covered by what lies between it and the surface); two: a stripline.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from sicheck import plausible
from sicheck.errors import InputError
from sicheck.physics.cross_section import CrossSection, Stratum
from sicheck.stackup_vias import ViaSpec, parse_plane_net, parse_vias
from sicheck.units import COPPER_OZ, UnitError, parse_quantity

LAYER_TYPES = ("mask", "signal", "plane", "dielectric")
TOP_KEYS = {"name", "units", "layers", "vias"}
LAYER_KEYS = {
    "mask": {"type", "name", "thickness", "er", "loss_tangent", "freq"},
    "signal": {"type", "name", "thickness", "copper", "etch_factor", "roughness", "huray_radius", "huray_ratio"},
    "plane": {"type", "name", "thickness", "copper", "net"},
    "dielectric": {"type", "name", "thickness", "er", "loss_tangent", "kind", "freq"},
}
BARE_UNITS = ("mm", "um", "mil", "in")


@dataclass(frozen=True)
class Layer:
    index: int
    type: str
    name: str
    thickness: float
    er: float | None = None
    loss_tangent: float = 0.0
    kind: str | None = None
    etch_factor: float | None = None
    line: int | None = None
    freq: float | None = None          # frequency at which er and loss_tangent were given
    roughness: float | None = None     # RMS copper roughness (Hammerstad-Jensen)
    huray_radius: float | None = None
    huray_ratio: float | None = None
    net: str | None = None             # plane only: the net its copper carries (default: the plane's name)

    @property
    def copper(self) -> bool:
        return self.type in ("signal", "plane")


@dataclass(frozen=True)
class Stackup:
    name: str
    layers: tuple[Layer, ...]
    source: str
    vias: ViaSpec = ViaSpec()          # how signal vias are built (the [vias] table)
    # each signal layer's geometry, worked out once (checks ask per via and per segment)
    _geometries: dict = field(default_factory=dict, init=False, compare=False, hash=False, repr=False)

    @property
    def signal_layers(self) -> list[Layer]:
        return [l for l in self.layers if l.type == "signal"]

    def layer(self, name: str) -> Layer | None:
        for l in self.layers:
            if l.type == "signal" and l.name.lower() == name.lower():
                return l
        return None

    @property
    def total_thickness(self) -> float:
        return sum(l.thickness for l in self.layers)

    def geometry(self, name: str) -> "LayerGeometry":
        key = name.lower()
        g = self._geometries.get(key)
        if g is None:
            g = self._geometries[key] = _geometry(self, self.layer(name))  # type: ignore[arg-type]
        return g

    @property
    def dispersive(self) -> bool:
        return any(l.freq is not None for l in self.layers)

    def cross_section(self, layer_name: str, width: float, gap: float | None = None,
                      freq: float | None = None) -> CrossSection:
        g = self.geometry(layer_name)
        if freq is not None and self.dispersive:
            g = _at_frequency(self, g, freq)
        top_width = None
        if g.etch_factor:
            # etch factor = thickness / (one side's undercut), so top = w - 2 t / ef
            top_width = max(width - 2.0 * g.thickness / g.etch_factor, 0.05 * width)
        return CrossSection(kind=g.kind, width=width, thickness=g.thickness, below=g.below,
                            above=g.above, gap=gap, top_width=top_width)


@dataclass(frozen=True)
class LayerGeometry:
    kind: str
    thickness: float
    below: tuple[Stratum, ...]   # toward the (nearer-side) reference plane
    above: tuple[Stratum, ...]
    references: tuple[str, ...]
    etch_factor: float | None


def _at_frequency(st: Stackup, g: "LayerGeometry", freq: float) -> "LayerGeometry":
    """The geometry with each stratum's er and loss tangent moved to ``freq`` (Djordjevic-Sarkar)."""
    from dataclasses import replace

    from sicheck.physics.loss import djordjevic_sarkar
    by_values = {(l.er, l.loss_tangent): l.freq for l in st.layers if l.freq is not None and l.er is not None}

    def move(s: Stratum) -> Stratum:
        f_ref = by_values.get((s.er, s.loss_tangent))
        if f_ref is None or s.loss_tangent <= 0:
            return s
        er, td = djordjevic_sarkar(freq, s.er, s.loss_tangent, f_ref)
        return replace(s, er=float(er), loss_tangent=float(td))
    return replace(g, below=tuple(move(s) for s in g.below), above=tuple(move(s) for s in g.above))


def _strata_between(layers: list[Layer], nearest_er: float | None) -> list[Stratum]:
    out: list[Stratum] = []
    for l in layers:
        if l.type in ("dielectric", "mask"):
            out.append(Stratum(l.thickness, float(l.er), l.loss_tangent, conformal=l.type == "mask"))
        elif l.type == "signal":
            # Another signal layer's copper is ignored (common practice): its thickness is
            # taken as resin of the neighbouring dielectric.
            er = out[-1].er if out else nearest_er
            tand = out[-1].loss_tangent if out else 0.0
            out.append(Stratum(l.thickness, float(er if er else 1.0), tand))
    return out


def _geometry(st: Stackup, sig: Layer) -> LayerGeometry:
    layers = list(st.layers)
    i = sig.index
    up = next((j for j in range(i - 1, -1, -1) if layers[j].type == "plane"), None)
    dn = next((j for j in range(i + 1, len(layers)) if layers[j].type == "plane"), None)

    def neighbour_er(seq):
        return next((l.er for l in seq if l.er is not None), None)

    if up is not None and dn is not None:
        above_layers = layers[up + 1:i][::-1]            # from the trace upward
        below_layers = layers[i + 1:dn]                  # from the trace downward
        above = _strata_between(above_layers, neighbour_er(above_layers))
        below = _strata_between(below_layers, neighbour_er(below_layers))
        return LayerGeometry("stripline", sig.thickness, tuple(below), tuple(above),
                             (layers[up].name, layers[dn].name), sig.etch_factor)
    if dn is not None:       # plane below, surface above
        to_plane = layers[i + 1:dn]
        to_surface = layers[:i][::-1]
        ref = layers[dn].name
    else:
        to_plane = layers[up + 1:i][::-1]
        to_surface = layers[i + 1:]
        ref = layers[up].name
    below = _strata_between(to_plane, neighbour_er(to_plane))
    above = _strata_between(to_surface, neighbour_er(to_surface))
    return LayerGeometry("microstrip", sig.thickness, tuple(below), tuple(above), (ref,), sig.etch_factor)


# ---------------------------------------------------------------- reading

def _key_line(text_lines: list[str], start: int, end: int, key: str) -> int | None:
    pat = re.compile(rf"^\s*{re.escape(key)}\s*=")
    for n in range(start, min(end, len(text_lines))):
        if pat.match(text_lines[n]):
            return n + 1
    return None


def load_stackup(path: str | Path) -> Stackup:
    path = Path(path)
    src = str(path)
    try:
        raw = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError("stackup file not found", file=src) from None
    except (OSError, UnicodeDecodeError) as e:
        raise InputError(f"cannot read stackup: {e}", file=src) from None
    try:
        data = tomllib.loads(raw)
    except tomllib.TOMLDecodeError as e:
        m = re.search(r"line (\d+)", str(e))
        raise InputError(f"TOML syntax error: {e}", file=src, line=int(m.group(1)) if m else None) from None
    return parse_stackup(data, raw, src)


def parse_stackup(data: dict, raw: str, src: str) -> Stackup:
    text_lines = raw.splitlines()
    block_starts = [n for n, l in enumerate(text_lines) if re.match(r"^\s*\[\[\s*layers\s*\]\]", l)]
    # the last block ends at the next table header (e.g. [vias]), not at the end of the file
    last_end = next((n for n in range(block_starts[-1] + 1, len(text_lines)) if re.match(r"^\s*\[", text_lines[n])),
                    len(text_lines)) if block_starts else len(text_lines)
    block_ends = block_starts[1:] + [last_end]
    head_end = block_starts[0] if block_starts else len(text_lines)

    for key in data:
        if key not in TOP_KEYS:
            raise InputError(f"unknown key '{key}' (allowed: {', '.join(sorted(TOP_KEYS))})", file=src,
                             line=_key_line(text_lines, 0, head_end, key), key=key)
    units = data.get("units")
    if units is not None and units not in BARE_UNITS:
        raise InputError(f"units must be one of {', '.join(BARE_UNITS)}", file=src,
                         line=_key_line(text_lines, 0, head_end, "units"), key="units")
    layers_raw = data.get("layers")
    if "layers" in data and not isinstance(layers_raw, list):
        raise InputError(f"layers must be a list of [[layers]] tables, one per layer, top to bottom "
                         f"(got {type(layers_raw).__name__} {layers_raw!r:.40})", file=src,
                         line=_key_line(text_lines, 0, head_end, "layers"), key="layers")
    if not layers_raw:
        raise InputError("no [[layers]] given: list the layers top to bottom, each as a [[layers]] table",
                         file=src, line=_key_line(text_lines, 0, head_end, "layers"), key="layers")

    layers: list[Layer] = []
    names: set[str] = set()
    unnamed: list[int] = []
    for i, lr in enumerate(layers_raw):
        if i < len(block_starts):
            start, end = block_starts[i], block_ends[i]
        else:   # an inline array (layers = [...]): point at its key
            start = (_key_line(text_lines, 0, head_end, "layers") or 1) - 1
            end = len(text_lines)

        def fail(msg, key=None, _s=start, _e=end, _i=i):
            line = (_key_line(text_lines, _s, _e, key) if key else None) or _s + 1
            raise InputError(f"layer {_i + 1}: {msg}", file=src, line=line, key=key)

        if not isinstance(lr, dict):
            fail("must be a table")
        ltype = lr.get("type")
        if ltype not in LAYER_TYPES:
            fail(f"type must be one of {', '.join(LAYER_TYPES)} (got {ltype!r})", "type")
        for key in lr:
            if key not in LAYER_KEYS[ltype]:
                fail(f"unknown key '{key}' for a {ltype} layer (allowed: {', '.join(sorted(LAYER_KEYS[ltype]))})",
                     key)
        name = lr.get("name")
        if ltype in ("signal", "plane"):
            if not isinstance(name, str) or not name.strip():
                fail(f"a {ltype} layer needs a name", "name")
            if name.lower() in names:
                fail(f"layer name '{name}' is used twice", "name")
            names.add(name.lower())
        label = name if name is not None and str(name).strip() else f"{ltype} {i + 1}"
        if name is None or not str(name).strip():
            unnamed.append(i)

        # thickness
        if "thickness" in lr and "copper" in lr:
            fail("give either thickness or copper, not both", "copper")
        if "copper" in lr:
            th_key = "copper"
            m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+)\s*oz\s*", str(lr["copper"]))
            if not m:
                fail(f"copper must be a weight such as '1oz' or '0.5oz' (got {lr['copper']!r})", "copper")
            thickness = float(m.group(1)) * COPPER_OZ
        elif "thickness" in lr:
            th_key = "thickness"
            try:
                thickness = parse_quantity(lr["thickness"], "length", units)
            except UnitError as e:
                hint = "" if units else " (or set units = \"mm\" at the top of the file)"
                fail(f"thickness: {e}{hint}", "thickness")
        else:
            fail("missing thickness" + (" or copper" if ltype in ("signal", "plane") else ""))
        if not thickness > 0:
            fail(f"{th_key} must be positive (got {lr[th_key]!r})", th_key)
        quantity = {"signal": "copper_thickness", "plane": "copper_thickness", "mask": "mask_thickness",
                    "dielectric": "dielectric_thickness"}[ltype]
        bad = plausible.check(quantity, thickness)
        if bad:
            fail(f"{th_key} {lr[th_key]!r}: {bad}", th_key)

        er = None
        tand = 0.0
        if ltype in ("mask", "dielectric"):
            if "er" not in lr:
                fail(f"this {ltype} layer needs er (relative permittivity)")
            er = lr["er"]
            if isinstance(er, bool) or not isinstance(er, (int, float)):
                fail(f"er must be a number (got {er!r})", "er")
            if bad := plausible.check("er", er):
                fail(f"er {bad}", "er")
            tand = lr.get("loss_tangent", 0.0)
            if isinstance(tand, bool) or not isinstance(tand, (int, float)):
                fail(f"loss_tangent must be a number (got {tand!r})", "loss_tangent")
            if bad := plausible.check("loss_tangent", tand):
                fail(f"loss_tangent {bad}", "loss_tangent")
        kind = lr.get("kind")
        if kind is not None and kind not in ("core", "prepreg"):
            fail("kind must be 'core' or 'prepreg'", "kind")
        ef = lr.get("etch_factor")
        if ef is not None and (isinstance(ef, bool) or not isinstance(ef, (int, float)) or not ef > 0):
            fail("etch_factor must be a positive number (thickness over one side's undercut)", "etch_factor")
        freq = None
        if "freq" in lr:
            try:
                freq = parse_quantity(lr["freq"], "frequency")
            except UnitError as e:
                fail(f"freq: {e}", "freq")
            if bad := plausible.check("frequency", freq):
                fail(f"freq {bad}", "freq")
        rough = {}
        for key in ("roughness", "huray_radius"):
            if key in lr:
                try:
                    rough[key] = parse_quantity(lr[key], "length", units)
                except UnitError as e:
                    fail(f"{key}: {e}", key)
                if bad := plausible.check(key, rough[key]):
                    fail(f"{key} {bad}", key)
        if "huray_ratio" in lr:
            hr = lr["huray_ratio"]
            if isinstance(hr, bool) or not isinstance(hr, (int, float)):
                fail("huray_ratio must be a number (ball surface per flat area)", "huray_ratio")
            if bad := plausible.check("huray_ratio", hr):
                fail(f"huray_ratio {bad}", "huray_ratio")
            rough["huray_ratio"] = float(hr)
        if ("huray_radius" in rough) != ("huray_ratio" in rough):
            fail("Huray's model needs both huray_radius and huray_ratio", "huray_radius")
        net = parse_plane_net(lr["net"], fail) if "net" in lr else (str(name).strip() if ltype == "plane" else None)
        layers.append(Layer(index=i, type=ltype, name=str(label), thickness=float(thickness),
                            er=None if er is None else float(er), loss_tangent=float(tand), kind=kind,
                            etch_factor=None if ef is None else float(ef), line=start + 1, freq=freq,
                            roughness=rough.get("roughness"), huray_radius=rough.get("huray_radius"),
                            huray_ratio=rough.get("huray_ratio"), net=net))

    layers = _name_by_place(layers, unnamed)
    st = Stackup(name=str(data.get("name") or Path(src).stem), layers=tuple(layers), source=src,
                 vias=parse_vias(data, text_lines, src, units))
    _check_structure(st, src)
    return st


def _name_by_place(layers: list[Layer], unnamed: list[int]) -> list[Layer]:
    """Name each unnamed dielectric by where it sits: 'prepreg TOP–GND2', 'mask over TOP'.

    The word is the layer's kind (core/prepreg) when given, else 'dielectric'; the names are
    the nearest copper layers above and below. Two unnamed layers in the same place get #1, #2.
    """
    from dataclasses import replace
    out = list(layers)
    for i in unnamed:
        l = layers[i]
        if l.copper:
            continue
        up = next((layers[j].name for j in range(i - 1, -1, -1) if layers[j].copper), None)
        dn = next((layers[j].name for j in range(i + 1, len(layers)) if layers[j].copper), None)
        word = "mask" if l.type == "mask" else (l.kind or "dielectric")
        if up and dn:
            place = f"{up}\u2013{dn}"
        elif dn:
            place = f"over {dn}"
        elif up:
            place = f"under {up}"
        else:
            place = f"layer {i + 1}"
        out[i] = replace(l, name=f"{word} {place}")
    counts: dict[str, int] = {}
    for i in unnamed:
        counts[out[i].name] = counts.get(out[i].name, 0) + 1
    seen: dict[str, int] = {}
    for i in unnamed:
        n = out[i].name
        if counts[n] > 1:
            seen[n] = seen.get(n, 0) + 1
            out[i] = replace(out[i], name=f"{n} #{seen[n]}")
    return out


def _check_structure(st: Stackup, src: str) -> None:
    layers = st.layers
    if not st.signal_layers:
        raise InputError("the stackup has no signal layer", file=src)
    for a, b in zip(layers, layers[1:]):
        if a.copper and b.copper:
            raise InputError(f"copper layers '{a.name}' and '{b.name}' touch: put a dielectric between them",
                             file=src, line=b.line)
    for l in layers:
        if l.type == "mask" and 0 < l.index < len(layers) - 1:
            raise InputError(f"mask layer '{l.name}' must be the first or last layer", file=src, line=l.line)
    for sig in st.signal_layers:
        has_up = any(l.type == "plane" for l in layers[:sig.index])
        has_dn = any(l.type == "plane" for l in layers[sig.index + 1:])
        if not (has_up or has_dn):
            raise InputError(f"signal layer '{sig.name}' has no reference plane above or below it",
                             file=src, line=sig.line)
