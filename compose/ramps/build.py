"""Build ramps from validated specs: sequential, diverging, threshold, qualitative and twins.

* sequential: one curve through the stops, re-parametrised by CAM02-UCS arc length so equal data
  steps are equal perceived steps; with ``values`` each stop is pinned to its data value and the
  arc length is even within each segment between stops.
* ``reverse = true`` or a domain written high to low flips a sequential or diverging ramp (the
  stops are taken in the opposite order; see :func:`compose.ramps.spec.parse_ramp`).
* diverging: two arms from the midpoint stop outwards. Both arms share one lightness progress:
  at data distance d from the centre each arm has gone the same fraction of its way in L*, and d
  follows the mean arc length of the two arms -- equal distance, equal lightness, nearly even
  steps. Both arms use the same data distance per unit (that of the longer side); the shorter arm
  is truncated. If an arm's L* is not monotone the arms fall back to their own arc length.
* threshold: two curves, ``below`` on [lo, at) and ``above`` on [at, hi], each by arc length.
* twin of a diverging base: per arm the base's L* and C*, one hue per arm (``hue = [low arm,
  high arm]``); the twin is itself a diverging ramp (``twin_of`` names its base).
* twin: the base's L* and C* at every position along the domain, its own hue, linear from
  ``hue[0]`` to ``hue[1]`` as written (write [350, 380] to pass through red). Where some member of
  a twin group cannot show the chroma at that L* and hue, the chroma is lowered in every member
  (the base included). The group is then re-parametrised together by the mean arc length.
* qualitative: the class colours as given.

The nodata colour, when not given, is the first of a few neutral greys (lightest preferred) that
lies at least 10 CIEDE2000 from every ramp colour; failing that the grey farthest from them.
"""
from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping

import numpy as np

from compose.color.difference import delta_e_2000
from compose.color.gamut import max_chroma
from compose.color.lab import lab_to_lch, lab_to_srgb, lch_to_lab, srgb_to_lab
from compose.color.parse import to_rgb8
from compose.errors import StyleError
from compose.ramps.curve import DENSE, arc_fraction, dense_curve, resample, to_space
from compose.ramps.model import Piece, Ramp
from compose.ramps.spec import RampSpec, parse_ramp

#: Ramp kinds a twin may be built from, and why (docs/style.md states the same rule).
TWINNABLE = ("sequential", "diverging")
TWIN_RULE = ("sequential and diverging ramps can be twinned (a twin has the same L* and C* at "
             "every value, its own hue: one hue path for a sequential base, one hue per arm for a "
             "diverging one); threshold ramps cannot (the hue change at the break is their "
             "message), nor qualitative ones (classes have no lightness order to match)")

__all__ = ["TWINNABLE", "TWIN_RULE", "NODATA_CANDIDATES", "NODATA_SEPARATION", "build_ramps",
           "build_ramp", "choose_nodata"]

# Candidate L* of neutral nodata greys, in order of preference (light first: nodata should sit
# quietly behind the data).
NODATA_CANDIDATES = (86.0, 80.0, 92.0, 74.0, 68.0, 96.0, 62.0, 56.0, 50.0, 44.0, 38.0)
NODATA_SEPARATION = 10.0  # dE00 (Brychtova & Coltekin 2016 recommend 10 for map colours)


def _piece(lab: np.ndarray, removed: np.ndarray, lo: float, hi: float, param: np.ndarray | None = None,
           closed: bool = True) -> Piece:
    """Resample a dense curve evenly in ``param`` (default: its CAM02-UCS arc length) over [lo, hi]."""
    param = arc_fraction(lab) if param is None else param
    lab2, removed2 = resample(param, (lab, removed))
    values = np.linspace(lo, hi, len(lab2))
    return Piece(lo, hi, values, lab2, removed2, np.zeros(len(lab2)), closed)


def _sequential(spec: RampSpec) -> tuple[Piece, ...]:
    lab, removed = dense_curve(np.array(spec.through), spec.space)
    if spec.values is None:
        return (_piece(lab, removed, *spec.domain),)
    # pinned stops: stop i sits at data value values[i]; between two stops the value follows
    # the CAM02-UCS arc length, so each segment is perceptually even on its own
    coords = to_space(np.array(spec.through), spec.space)
    chord = np.maximum(np.sqrt(np.sum(np.diff(coords, axis=0) ** 2, axis=-1)), 1e-6)
    knots = np.concatenate([[0.0], np.cumsum(chord)]) / np.sum(chord)   # as dense_curve spaces them
    arc = arc_fraction(lab)
    arc_at_stops = np.maximum.accumulate(np.interp(knots, np.linspace(0.0, 1.0, len(lab)), arc))
    lo, hi = spec.domain
    value = np.interp(arc, arc_at_stops, spec.values)
    return (_piece(lab, removed, lo, hi, param=(value - lo) / (hi - lo)),)


def _lightness_progress(lab: np.ndarray) -> np.ndarray | None:
    """Fraction 0-1 of the way from the first to the last L*, or None if L* is not monotone."""
    L = lab[:, 0]
    span = L[-1] - L[0]
    if abs(span) < 1e-6 or np.any(np.diff(L) * np.sign(span) < 0):
        return None
    return np.maximum.accumulate((L - L[0]) / span)


def _diverging(spec: RampSpec) -> tuple[Piece, ...]:
    lo, hi = spec.domain
    c = spec.center
    m = len(spec.through) // 2
    arms = [dense_curve(np.array(spec.through[m::-1]), spec.space),   # midpoint -> low end
            dense_curve(np.array(spec.through[m:]), spec.space)]      # midpoint -> high end
    progress = [_lightness_progress(lab) for lab, _ in arms]
    arcs = [arc_fraction(lab) for lab, _ in arms]
    resampled = []
    if all(p is not None for p in progress):
        on_grid = []
        for (lab, removed), p, a in zip(arms, progress, arcs):
            on_grid.append(resample(p, (lab, removed, a)))   # even in lightness progress
        mean_arc = np.mean([g[2] for g in on_grid], axis=0)
        mean_arc = np.maximum.accumulate(mean_arc) / max(mean_arc[-1], 1e-12)
        for lab, removed, _ in on_grid:
            resampled.append(resample(mean_arc, (lab, removed)))
    else:
        for (lab, removed), a in zip(arms, arcs):
            resampled.append(resample(a, (lab, removed)))
    reach = max(c - lo, hi - c)                 # data distance of an arm's end
    pieces = []
    for side, (lab, removed) in zip((-1, 1), resampled):
        length = (c - lo) if side < 0 else (hi - c)
        q = np.linspace(0.0, 1.0, len(lab))
        keep = np.linspace(0.0, length / reach, DENSE)
        lab_t = np.stack([np.interp(keep, q, lab[:, j]) for j in range(3)], axis=-1)
        rem_t = np.interp(keep, q, removed)
        values = c + side * keep * reach
        if side < 0:
            values, lab_t, rem_t = values[::-1], lab_t[::-1], rem_t[::-1]
        pieces.append(Piece(float(values[0]), float(values[-1]), values, lab_t, rem_t,
                            np.zeros(len(values)), closed=side > 0))
    # exact ends (rounding of c +- reach)
    p0, p1 = pieces
    p0.values[0], p0.values[-1], p1.values[0], p1.values[-1] = lo, c, c, hi
    return (dataclasses.replace(p0, lo=lo, hi=c), dataclasses.replace(p1, lo=c, hi=hi))


def _threshold(spec: RampSpec) -> tuple[Piece, ...]:
    lo, hi = spec.domain
    below = dense_curve(np.array(spec.below), spec.space)
    above = dense_curve(np.array(spec.above), spec.space)
    return (_piece(*below, lo, spec.at, closed=False), _piece(*above, spec.at, hi))


def _ends(pieces: tuple[Piece, ...]) -> tuple[tuple, tuple]:
    first = np.clip(lab_to_srgb(pieces[0].lab[0]), 0, 1)
    last = np.clip(lab_to_srgb(pieces[-1].lab[-1]), 0, 1)
    return tuple(map(float, first)), tuple(map(float, last))


def choose_nodata(rgb_colors: np.ndarray) -> tuple[float, float, float]:
    """A neutral grey (8-bit, C*ab ~ 0) at least 10 dE00 from every colour of ``rgb_colors`` (n, 3).

    Tries :data:`NODATA_CANDIDATES` in order; if none qualifies, returns the one farthest away.
    """
    lab = srgb_to_lab(np.asarray(rgb_colors, dtype=float))
    best, best_d = None, -1.0
    for L in NODATA_CANDIDATES:
        gray = to_rgb8(np.clip(lab_to_srgb(np.array([L, 0.0, 0.0])), 0, 1)) / 255.0
        d = float(np.min(delta_e_2000(srgb_to_lab(gray), lab)))
        if d >= NODATA_SEPARATION:
            return tuple(map(float, gray))
        if d > best_d:
            best, best_d = gray, d
    return tuple(map(float, best))


def _drawn_colors(ramp: Ramp) -> np.ndarray:
    if ramp.kind == "qualitative":
        return np.array([c.rgb for c in ramp.classes])
    lo, hi = ramp.domain
    rgb = ramp.colors_at(np.linspace(lo, hi, 257))
    return np.concatenate([rgb, [ramp.outside_low, ramp.outside_high]])


def _finish(ramp: Ramp, spec: RampSpec) -> Ramp:
    """Fill in the outside low / high colours (end colours; first / last class of a stepped ramp) and nodata
    (given, or chosen off the ramp)."""
    if ramp.kind != "qualitative":
        if ramp.stepped:   # a classed map continues its first and last classes
            classes = ramp.class_colors(ramp.class_edges())
            first, last = tuple(map(float, classes[0])), tuple(map(float, classes[-1]))
        else:
            first, last = _ends(ramp.pieces)
        ramp = dataclasses.replace(ramp, outside_low=spec.outside_low or first,
                                   outside_high=spec.outside_high or last)
    if spec.nodata is not None:
        return dataclasses.replace(ramp, nodata=spec.nodata, nodata_given=True)
    return dataclasses.replace(ramp, nodata=choose_nodata(_drawn_colors(ramp)))


_GRAY = (0.5, 0.5, 0.5)


def _from_spec(spec: RampSpec, pieces=(), **extra) -> Ramp:
    if spec.kind == "qualitative":
        return Ramp(spec.name, "qualitative", (0.0, 1.0), (), "cielab", _GRAY, _GRAY, _GRAY,
                    classes=spec.classes, path=spec.path)
    stops = spec.through or (spec.below + spec.above)
    return Ramp(spec.name, spec.kind, spec.domain, stops, spec.space, _GRAY, _GRAY, _GRAY, pieces,
                center=spec.center, at=spec.at, n_below=len(spec.below), steps=spec.steps,
                step_method=spec.step_method or "equal", breaks=spec.breaks,
                samples=spec.samples or 1024, path=spec.path, values=spec.values,
                listed_reversed=spec.listed_reversed, **extra)


def build_ramp(spec: RampSpec) -> Ramp:
    """Build one ramp that is not a twin (twins need their group: use :func:`build_ramps`)."""
    builders = {"sequential": _sequential, "diverging": _diverging, "threshold": _threshold}
    if spec.kind == "twin":
        raise StyleError(f"{spec.where}: a twin is built with its base; use build_ramps")
    pieces = builders[spec.kind](spec) if spec.kind in builders else ()
    return _finish(_from_spec(spec, pieces), spec)


def _root_of(name: str, specs: Mapping[str, RampSpec]) -> list[str]:
    """The chain name -> base -> ... -> root (a non-twin); errors for unknown bases and cycles."""
    chain = [name]
    while specs[chain[-1]].kind == "twin":
        spec = specs[chain[-1]]
        base = spec.twin
        if base not in specs:
            raise StyleError(f"{spec.where}: twin '{base}' is not a ramp; ramps: {', '.join(sorted(specs))}")
        if base in chain:
            raise StyleError(f"{spec.where}: twins form a cycle: {' -> '.join(chain + [base])}")
        chain.append(base)
    root = specs[chain[-1]]
    if root.kind not in TWINNABLE:
        raise StyleError(f"{specs[name].where}: twin base \"{root.name}\" is a {root.kind} ramp; "
                         f"{TWIN_RULE}")
    return chain


def _in_base_order(root: str, twins: list[RampSpec]) -> list[RampSpec]:
    """Twins ordered so every twin comes after its base."""
    done, order, pending = {root}, [], list(twins)
    while pending:
        ready = [s for s in pending if s.twin in done]
        for s in ready:
            pending.remove(s)
            done.add(s.name)
            order.append(s)
    return order


def _diverging_twin_group(root: Ramp, root_spec: RampSpec, twins: list[RampSpec]) -> dict[str, Ramp]:
    """Twins of a diverging ``root``: per arm, the base's L* and C* at every value, the twin's
    hue ``hue[0]`` on the low arm and ``hue[1]`` on the high arm; where some member cannot show
    the chroma at that L* and hue, every member's chroma is lowered there. The base's data
    positions are kept, so equal distance from the centre keeps equal L* in every member."""
    twins = _in_base_order(root.name, twins)
    names = (root.name,) + tuple(t.name for t in twins)
    arms = []
    for k, piece in enumerate(root.pieces):
        lch = lab_to_lch(piece.lab)
        L, C = lch[:, 0], lch[:, 1]
        hues = {root.name: lch[:, 2]}
        for spec in twins:
            hues[spec.name] = np.full(len(L), spec.hue[k] % 360.0)
        ceiling = np.min([max_chroma(L, h) for n, h in hues.items() if n != root.name] + [C], axis=0)
        ceiling = np.minimum(ceiling, C)
        labs = {n: lch_to_lab(np.stack([L, ceiling, h], axis=-1)) for n, h in hues.items()}
        arms.append((piece, labs, C - ceiling))

    def pieces_for(name: str, domain: tuple[float, float]) -> tuple[Piece, ...]:
        lo, hi = root.domain
        scale = (domain[1] - domain[0]) / (hi - lo)
        out = []
        for piece, labs, matched in arms:
            values = domain[0] + (piece.values - lo) * scale
            out.append(Piece(float(values[0]), float(values[-1]), values, labs[name],
                             piece.removed, matched, piece.closed))
        return tuple(out)

    result = {root.name: _finish(dataclasses.replace(root, pieces=pieces_for(root.name, root.domain),
                                                     matched=names), root_spec)}
    for spec in twins:
        base = result[spec.twin]
        domain = spec.domain or base.domain
        center = domain[0] + (root.center - root.domain[0]) * (domain[1] - domain[0]) / (
            root.domain[1] - root.domain[0])
        steps, breaks, step_method = _twin_steps(spec, base, domain)
        ramp = Ramp(spec.name, "diverging", domain, base.stops, base.space, _GRAY, _GRAY, _GRAY,
                    pieces_for(spec.name, domain), center=center, twin_of=spec.twin, hue=spec.hue,
                    matched=names, base=base, steps=steps, breaks=breaks,
                    step_method=step_method,
                    samples=spec.samples or base.samples, path=spec.path)
        result[spec.name] = _finish(ramp, spec)
    return result


def _twin_steps(spec: RampSpec, base: Ramp, domain: tuple[float, float]):
    """A twin's classes: its own steps/breaks if it states any, else its base's; its breaks must lie
    inside its domain. Returns (steps, breaks, step method)."""
    stepped = spec.steps is not None or spec.breaks is not None
    steps, breaks = (spec.steps, spec.breaks) if stepped else (base.steps, base.breaks)
    if breaks is not None and (breaks[0] <= domain[0] or breaks[-1] >= domain[1]):
        raise StyleError(f"{spec.where}: 'breaks' must lie inside the domain "
                         f"[{domain[0]:g}, {domain[1]:g}]")
    return steps, breaks, spec.step_method or (base.step_method if not stepped else "equal")


def _twin_group(root: Ramp, root_spec: RampSpec, twins: list[RampSpec]) -> dict[str, Ramp]:
    """Build the twins of ``root`` and lower the chroma of every member where any needs it."""
    if root.kind == "diverging":
        return _diverging_twin_group(root, root_spec, twins)
    (piece,) = root.pieces
    twins = _in_base_order(root.name, twins)
    u = np.linspace(0.0, 1.0, len(piece.values))
    lch = lab_to_lch(piece.lab)
    L, C = lch[:, 0], lch[:, 1]
    hues = {root.name: lch[:, 2]}
    for spec in twins:
        hues[spec.name] = (spec.hue[0] + u * (spec.hue[1] - spec.hue[0])) % 360.0
    ceiling = np.min([max_chroma(L, h, top=C) for n, h in hues.items() if n != root.name] + [C],
                     axis=0)
    ceiling = np.minimum(ceiling, C)
    matched = C - ceiling
    labs = {n: lch_to_lab(np.stack([L, ceiling, h], axis=-1)) for n, h in hues.items()}
    arcs = np.mean([arc_fraction(lab) for lab in labs.values()], axis=0)
    arcs = np.maximum.accumulate(arcs) / arcs[-1]
    names = tuple(hues)

    def piece_for(name: str, domain: tuple[float, float]) -> Piece:
        lab2, rem2, mat2 = resample(arcs, (labs[name], piece.removed, matched))
        return Piece(domain[0], domain[1], np.linspace(*domain, len(lab2)), lab2, rem2, mat2)

    result = {root.name: _finish(dataclasses.replace(root, pieces=(piece_for(root.name, root.domain),),
                                                     matched=names), root_spec)}
    for spec in twins:
        base = result[spec.twin]
        domain = spec.domain or base.domain
        steps, breaks, step_method = _twin_steps(spec, base, domain)
        ramp = Ramp(spec.name, "twin", domain, base.stops, base.space, _GRAY, _GRAY, _GRAY,
                    (piece_for(spec.name, domain),), twin_of=spec.twin, hue=spec.hue, matched=names,
                    base=base, steps=steps, breaks=breaks,
                    step_method=step_method,
                    samples=spec.samples or base.samples, path=spec.path)
        result[spec.name] = _finish(ramp, spec)
    return result


def build_ramps(tables: Mapping, only: Iterable[str] | None = None) -> dict[str, Ramp]:
    """Validate every ramp of a style and build them (or those named in ``only``).

    ``tables`` maps a ramp name to an object with ``.name``, ``.table`` (raw TOML mapping) and
    ``.path`` (the style file). Twins are built with their base (a twin of a twin shares the
    root's lightness and chroma); an unknown base or a cycle is a StyleError.
    ``only``: names of the ramps a render draws (unknown names are ignored: the layer reports
    them); every ramp is still checked, but only these and the twin groups they belong to are
    built, each exactly as in a full build.
    Returns ``{name: Ramp}`` in the order of ``tables``.
    """
    specs = {name: parse_ramp(t.name, t.table, t.path) for name, t in tables.items()}
    groups: dict[str, list[RampSpec]] = {}
    root_of: dict[str, str] = {}
    for name, spec in specs.items():
        if spec.kind == "twin":
            chain = _root_of(name, specs)
            groups.setdefault(chain[-1], []).append(spec)
            root_of[name] = chain[-1]
    if only is None:
        wanted = set(specs)
    else:
        roots = {root_of.get(n, n) for n in only if n in specs}
        wanted = roots | {t.name for r in roots for t in groups.get(r, [])}
    built: dict[str, Ramp] = {}
    for name, spec in specs.items():
        if spec.kind != "twin" and name in wanted:
            built[name] = build_ramp(spec)
    for root, twins in groups.items():
        if root in wanted:
            built.update(_twin_group(built[root], specs[root], twins))
    return {name: built[name] for name in specs if name in built}
