"""Thematic rasters of the demo region: land cover, productivity, water temperature, anomaly.

Dev script for the demo region, not part of compose. All fields are on the fine grid, float64
until written; masks are boolean.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage

from _noise import rng_for, smoothstep, spectral_noise

__all__ = ["CLASSES", "Context", "landcover", "clouds", "land_productivity",
           "water_productivity", "water_temperature", "anomaly", "CORAL_ALERT"]

# value: (label, family)
CLASSES = {
    1: ("Conifer forest", "woody"),
    2: ("Broadleaf forest", "woody"),
    3: ("Shrubland", "woody"),
    4: ("Cropland", "agriculture"),
    5: ("Pasture", "agriculture"),
    6: ("Wetland", "wetland"),
    7: ("Settlement", "settlement"),
    8: ("Bare rock and sand", "bare"),
}
CORAL_ALERT = 26.0   # deg C, the invented coral-stress alert threshold


@dataclass(frozen=True, slots=True)
class Context:
    """Everything the themes depend on, on the fine grid."""

    z: np.ndarray             # elevation, m
    land: np.ndarray          # bool
    lagoon: np.ndarray        # bool
    spit: np.ndarray          # bool
    river_d: np.ndarray       # m to the nearest river line
    river_order: np.ndarray   # Strahler order of that nearest river
    coast_d: np.ndarray       # m to the shoreline (on land: to water; on water: to land)
    mouths: list[tuple[float, float, float]]   # (col, row, drained km^2) of river mouths
    towns: list[tuple[float, float, int]]      # (col, row, population)
    cell: float
    seed: int


def _bump(v: np.ndarray, centre: float, width: float) -> np.ndarray:
    return np.exp(-(((v - centre) / width) ** 2))


def _noise(ctx: Context, tag: int, longest: float, shortest: float, beta: float = 3.0):
    return spectral_noise(rng_for(ctx.seed, tag), ctx.z.shape, ctx.cell, beta, longest, shortest)


def _slope_aspect(ctx: Context) -> tuple[np.ndarray, np.ndarray]:
    """Slope in degrees and 'southness' in [-1, 1] (1 on slopes facing due south)."""
    gy, gx = np.gradient(ctx.z, ctx.cell)           # gy: per row, rows run southward
    dz_north = -gy
    mag = np.hypot(gx, dz_north)
    south = np.where(mag > 1e-6, dz_north / np.maximum(mag, 1e-6), 0.0)
    return np.degrees(np.arctan(mag)), south


def landcover(ctx: Context) -> np.ndarray:
    """uint8 classes 1-8 on land (see CLASSES), 0 on water.

    Forest, shrub, crop and pasture compete by scores built from elevation, slope, aspect,
    nearness to rivers and the coast, plus smooth noise; a 5x5 majority pass removes specks.
    Wetland, settlement and bare rock are then imposed where their conditions hold.
    """
    z = np.maximum(ctx.z, 0.0)
    slope, south = _slope_aspect(ctx)
    wet = np.exp(-ctx.river_d / 400.0)
    near_coast = np.exp(-ctx.coast_d / 700.0)
    n = [_noise(ctx, 40 + k, 5000.0, 150.0) for k in range(6)]
    scores = np.stack([
        1.1 * _bump(z, 1250.0, 380.0) + 0.25 * n[0] + 0.15 * smoothstep((slope - 15) / 15),
        0.78 * _bump(z, 500.0, 420.0) * (0.6 + 0.4 * smoothstep((slope - 6) / 18))
        + 0.25 * n[1] + 0.15 * wet,
        0.3 + 0.3 * south * smoothstep(slope / 20.0) + 0.22 * n[2] + 0.45 * near_coast
        + 0.5 * _bump(z, 1550.0, 150.0),
        1.25 * (1.0 - smoothstep((slope - 2.0) / 5.0)) * np.exp(-z / 300.0) + 0.25 * n[3]
        + 0.15 * wet,
        0.92 * _bump(z, 650.0, 520.0) * (1.0 - smoothstep((slope - 12) / 10)) + 0.25 * n[4],
    ])
    cls = np.argmax(scores, axis=0).astype(np.uint8) + 1
    onehot = np.stack([ndimage.uniform_filter((cls == k).astype(np.float32), 5)
                       for k in range(1, 6)])
    cls = np.argmax(onehot, axis=0).astype(np.uint8) + 1
    bare = (z > 1590.0 + 110.0 * n[5]) | ((slope > 40.0) & (z > 700.0))
    bare |= ctx.spit & (ctx.coast_d > 30.0) & (n[5] > -0.3)
    d_lag = ndimage.distance_transform_edt(~ctx.lagoon) * ctx.cell
    mouth_near = np.zeros(z.shape, dtype=bool)
    rr, cc = np.ogrid[: z.shape[0], : z.shape[1]]
    for col, row, area in ctx.mouths:
        rad = (900.0 + 120.0 * np.sqrt(area)) / ctx.cell
        mouth_near |= (rr - row) ** 2 + (cc - col) ** 2 < rad**2
    lowland = (z < 5.0 + 2.5 * n[2]) & (slope < 3.0)
    floodplain = (ctx.river_order >= 3) & (ctx.river_d < 250.0 + 150.0 * n[3]) & (z < 12.0)
    wetland = ((lowland & ((d_lag < 1500.0 + 500.0 * n[0]) | mouth_near)) | floodplain) & ~ctx.spit
    town_d = np.full(z.shape, np.inf)
    warp = 1.0 + 0.35 * _noise(ctx, 47, 3000.0, 120.0)
    for col, row, pop in ctx.towns:
        r = 180.0 * (pop / 1000.0) ** 0.45
        d = np.hypot(rr - row, cc - col) * ctx.cell * warp / r
        town_d = np.minimum(town_d, d)
    settlement = (town_d < 1.0) & (slope < 20.0)
    cls = np.where(wetland, 6, cls)
    cls = np.where(bare, 8, cls)
    cls = np.where(settlement, 7, cls)
    cls = np.where(ctx.land, cls, 0).astype(np.uint8)
    return cls


def clouds(ctx: Context, share: float = 0.07) -> np.ndarray:
    """Cloud gaps: the top ``share`` of a smooth noise field, as a boolean mask."""
    f = _noise(ctx, 60, 18000.0, 250.0, beta=3.6)
    f += 0.6 * _noise(ctx, 61, 3000.0, 90.0, beta=3.0)
    return f > np.quantile(f, 1.0 - share)


_LC_FACTOR = np.array([0.0, 0.72, 0.95, 0.5, 1.0, 0.8, 1.05, 0.22, 0.04])


def land_productivity(ctx: Context, cls: np.ndarray) -> np.ndarray:
    """Gross plant productivity in g C m-2 day-1 (0-12) on land, NaN on water.

    Class factor x elevation (cooler heights grow less) x moisture (near rivers grows more)
    x smooth noise, softened by a 1-cell Gaussian, saturating softly toward 12 (12 tanh(p / 12)).
    """
    z = np.maximum(ctx.z, 0.0)
    f_elev = 0.25 + 0.75 * np.exp(-((z / 1400.0) ** 2))
    scale = 500.0 + 150.0 * ctx.river_order
    moist = 0.72 + 0.28 * np.exp(-ctx.river_d / scale)
    noise = 1.0 + 0.08 * _noise(ctx, 70, 8000.0, 120.0)
    p = 14.0 * _LC_FACTOR[cls] * f_elev * moist * noise
    p = 12.0 * np.tanh(np.maximum(ndimage.gaussian_filter(p, 1.0), 0.0) / 12.0)
    return np.where(ctx.land, p, np.nan)


def _plumes(ctx: Context) -> np.ndarray:
    rr, cc = np.ogrid[: ctx.z.shape[0], : ctx.z.shape[1]]
    out = np.zeros(ctx.z.shape)
    for col, row, area in ctx.mouths:
        amp = min(1.0, np.sqrt(area / 60.0))
        rad = (1000.0 + 150.0 * np.sqrt(area)) / ctx.cell
        out = np.maximum(out, amp * np.exp(-((rr - row) ** 2 + (cc - col) ** 2) / rad**2))
    return out


def water_productivity(ctx: Context) -> np.ndarray:
    """Plankton productivity in g C m-2 day-1 (0-12) on water, NaN on land.

    Low offshore, higher near the shore and over the shallow shelf, plumes at river mouths,
    highest in the lagoon; smooth eddy-like noise throughout; saturating softly toward 12.
    """
    water = ~ctx.land
    off = 0.4 + 0.5 * smoothstep(0.5 + 0.25 * _noise(ctx, 80, 30000.0, 2000.0))
    coastal = 4.5 * np.exp(-ctx.coast_d / 2500.0) + 1.5 * np.exp(np.minimum(ctx.z, 0.0) / 40.0)
    plume = 6.5 * _plumes(ctx) * (1.0 + 0.25 * _noise(ctx, 81, 4000.0, 150.0))
    eddy = 1.0 + 0.2 * _noise(ctx, 82, 15000.0, 400.0)
    p = (off + coastal + plume) * eddy
    lag = 9.0 + 1.4 * _noise(ctx, 83, 4000.0, 150.0)
    p = np.where(ctx.lagoon, np.maximum(lag, p), p)
    return np.where(water, 12.0 * np.tanh(np.maximum(p, 0.0) / 12.0), np.nan)


def water_temperature(ctx: Context, above: float = 0.2) -> np.ndarray:
    """Water surface temperature in deg C on water (NaN on land), 14-30 deg C.

    Warm in the shallow lagoon and near the coast, cooler offshore and in river plumes,
    a warmer south and smooth eddies. The field is mapped affinely so that its 1st
    percentile is 16 deg C and a share ``above`` of the water lies above CORAL_ALERT; the
    ends are then eased (tanh) so all values stay inside 14-30 deg C.
    """
    water = ~ctx.land
    rows = np.arange(ctx.z.shape[0])[:, None] / ctx.z.shape[0]
    t = (1.0 * np.exp(-ctx.coast_d / 3000.0) + 1.0 * np.exp(np.minimum(ctx.z, 0.0) / 25.0)
         + 1.2 * ctx.lagoon + 0.5 * rows + 0.35 * _noise(ctx, 90, 25000.0, 1500.0)
         - 0.6 * _plumes(ctx))
    tw = t[water]
    q01, qa = np.quantile(tw, 0.01), np.quantile(tw, 1.0 - above)
    temp = CORAL_ALERT + (t - qa) * (CORAL_ALERT - 16.0) / (qa - q01)
    hot, cold = temp > CORAL_ALERT, temp < 18.0
    temp = np.where(hot, CORAL_ALERT + 4.0 * np.tanh((temp - CORAL_ALERT) / 4.0), temp)
    temp = np.where(cold, 18.0 - 4.0 * np.tanh((18.0 - temp) / 4.0), temp)
    return np.where(water, temp, np.nan)


def anomaly(ctx: Context, cls: np.ndarray) -> np.ndarray:
    """Land-surface temperature anomaly in K (this season minus a baseline), about -4..+4.

    Smooth large-scale structure, warmer at height and over settlements, cooler along
    rivers; centred on its median and scaled so that 99.5 % of |values| <= 3.8 K. NaN on water.
    """
    z = np.maximum(ctx.z, 0.0)
    a = (1.0 * _noise(ctx, 100, 45000.0, 6000.0, beta=4.0)
         + 0.45 * _noise(ctx, 101, 8000.0, 1500.0)
         + 0.9 * (z / 1800.0 - 0.25)
         - 0.4 * np.exp(-ctx.river_d / 800.0)
         + 0.8 * ndimage.gaussian_filter((cls == 7).astype(float), 4.0))
    land = ctx.land
    a = a - np.median(a[land])
    a = a * 3.8 / np.quantile(np.abs(a[land]), 0.995)
    return np.where(land, np.clip(a, -4.5, 4.5), np.nan)
