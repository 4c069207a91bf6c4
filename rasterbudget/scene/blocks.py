"""The per-block work of a scene: read the windows, the surface state, pass 1 and pass 2.

Each function takes a small picklable :class:`BlockContext` and a block location, reads its own
windows and returns small arrays, so the passes never hold more than a block per thread.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from rasterio.windows import Window

from ..catalog.inputs import INPUTS, derive_inputs, gridded_weather_in_si
from ..catalog.qa import QA
from ..catalog.surfaces import buffered_mask
from ..catalog.variables import QA_OUTPUT
from ..errors import InputValueError
from ..io.grid import (
    Grid,
    InputSource,
    open_for_reading,
    read_window,
)
from ..methods import get_method
from ..methods.ensemble import ensemble_percentiles
from ..physics import partition, turbulence
from ..physics.constants import SECONDS_PER_HOUR
from ..physics.solar import (
    surface_normal,
)
from ..screens import (
    ScreenSettings,
    homogeneous_pixels,
    neighbourhood_features,
    surface_rules,
)
from ..surface import (
    ClassLookups,
    SceneConstants,
    land_cover_codes,
    surface_block,
)
from .geometry import daily_sun, pixel_geometry
from .summaries import (
    HISTOGRAM_RANGES,
    class_histograms,
)


@dataclass(frozen=True)
class BlockContext:
    """Everything a block function needs besides its location (small, picklable)."""

    grid: Grid
    constants: SceneConstants
    lookups: ClassLookups
    sources: tuple[InputSource, ...]
    method: str = "anchors"
    remap: tuple[tuple[int, int], ...] = ()  # user land-cover code -> class code
    metric_pixel_size: tuple[float, float] = (1.0, 1.0)  # for slopes [m]
    wind_profile: tuple[float, float, float] | None = None  # wind height, z0m station, z blend
    blending_wind_speed: float = float("nan")  # station wind carried to the blending height
    mask_values: tuple[int, ...] = ()  # cloud/QA mask values to drop
    mask_bits: tuple[int, ...] = ()  # cloud/QA mask bits to drop
    member_offsets: tuple[tuple[float, float, float], ...] = ()  # members' (air, albedo, Ts)
    derive_facts: tuple[tuple[str, float], ...] = ()  # scene facts of derived inputs
    mask_buffer: int = 0  # halo read for a derived cloud mask's buffer [pixels]
    halo: int = 0  # pixels read beyond each window for neighbourhood work (>= mask_buffer)
    # the inputs that neighbourhood work reads: only these are read with the halo (the others
    # are padded with NaN, cropped away again); empty: every input
    halo_roles: tuple[str, ...] = ()
    anchor_screens: bool = False  # compute the anchor screens' neighbourhood features
    # pass 2: the scratch raster of pass 1's neighbourhood results (CARRIED_* bits), read in
    # place of the halo; empty: neighbourhood work from the halo
    carried: str = ""


#: Bits of the scratch raster pass 1 writes for pass 2, so that pass 2 reads its windows without
#: a halo (a halo decodes the neighbouring GeoTIFF tiles: py-spy, 4096 scene, the halo reads were
#: most of the reading time): the pixel passes the homogeneity screens; a masked pixel lies within
#: the cloud distance; the pixel itself is masked (after a derived mask's buffer).
CARRIED_HOMOGENEOUS, CARRIED_NEAR_MASK, CARRIED_MASKED = 1, 2, 4


def carried_bits(
    features: dict[str, np.ndarray] | None,
    masked: np.ndarray | None,
    settings: ScreenSettings,
    shape: tuple[int, ...],
) -> np.ndarray:
    """Pass 1's neighbourhood results of a window as CARRIED_* bits (uint8)."""
    bits = np.zeros(shape, dtype=np.uint8)
    features = features or {}
    bits[homogeneous_pixels(features, settings, shape)] |= CARRIED_HOMOGENEOUS
    if "near_mask" in features:
        bits[features["near_mask"]] |= CARRIED_NEAR_MASK
    if masked is not None:
        bits[masked] |= CARRIED_MASKED
    return bits


def carried_features(bits: np.ndarray) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """The anchor screens' features and the masked pixels from CARRIED_* bits."""
    features = {
        "homogeneous": (bits & CARRIED_HOMOGENEOUS) > 0,
        "near_mask": (bits & CARRIED_NEAR_MASK) > 0,
    }
    return features, (bits & CARRIED_MASKED) > 0


def block_state(
    ctx: BlockContext,
    rows: slice,
    cols: slice,
    daily: bool = True,
    candidates_only: bool = False,
    value_stats: bool = False,
) -> dict[str, np.ndarray]:
    """Read one window of every input and compute its surface state.

    ``daily``: with the daily net radiation (pass 1 does not need it). ``candidates_only``: the
    state of the pixels whose class may serve as an anchor only, as 1-D arrays, with their
    row-major index in the window as ``window_index`` (pass 1 of the anchor method: the other
    pixels never enter its histograms, and skipping them halved pass 1's time). ``value_stats``:
    with the inputs' value statistics (``input_stats``) for pass 1's checks of the inputs.
    """
    data = {}
    normal = None
    # Neighbourhood work (a derived cloud mask's buffer, the anchor screens' homogeneity and
    # cloud distance) reads the inputs with a halo, so that it crosses block edges as if the
    # scene were one block; everything is cropped to the window afterwards.
    halo = ctx.halo
    for source in ctx.sources:
        if source.role == "elevation" or (ctx.carried and source.role == "cloud_mask"):
            continue  # the DEM below; the cloud mask's result is carried from pass 1
        if halo and ctx.halo_roles and source.role not in ctx.halo_roles:
            # not read by the neighbourhood work: a halo of NaN, cropped away below (reading
            # a halo decodes the neighbouring GeoTIFF tiles too: 6x a block's own read)
            values = read_window(source, rows, cols)
            data[source.role] = np.pad(values, halo, constant_values=np.nan)
        else:
            data[source.role] = read_window(source, rows, cols, halo=halo)
    # pass 2 has the cloud mask's result from pass 1: a derived mask is not made again
    data = derive_inputs(data, dict(ctx.derive_facts), skip=("cloud_mask",) if ctx.carried else ())
    masked = features = carried = None
    if ctx.carried:  # pass 2: pass 1's neighbourhood results, read in place of a halo
        carried = open_for_reading(ctx.carried).read(
            1, window=Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start)
        )
        features, masked = carried_features(carried)
        if not ctx.anchor_screens:
            features = None
    elif "cloud_mask" in data:
        if ctx.mask_buffer:
            data["cloud_mask"] = buffered_mask(data["cloud_mask"])
        masked = mask_pixels(data["cloud_mask"], ctx.mask_values, ctx.mask_bits)
    if ctx.anchor_screens and not ctx.carried:
        features = neighbourhood_features(
            data["surface_temperature"],
            data.get("ndvi"),
            masked,
            ctx.constants.screens.cloud_distance,
        )
    if halo:

        def crop(values):
            return values[halo:-halo, halo:-halo]

        data = {role: crop(values) for role, values in data.items()}
        masked = None if masked is None else crop(masked)
        features = None if features is None else {k: crop(v) for k, v in features.items()}
    # pass 1 keeps its neighbourhood results for pass 2 (written by pass1_block)
    carry = None
    if ctx.halo and not ctx.carried:
        shape = (rows.stop - rows.start, cols.stop - cols.start)
        carry = carried_bits(features, masked, ctx.constants.screens, shape)
    for source in ctx.sources:
        if source.role == "elevation":
            # one-pixel halo for the slope; edge pixels repeat beyond the grid
            haloed = read_window(source, rows, cols, halo=1)
            dx, dy = ctx.metric_pixel_size
            normal = tuple(n[1:-1, 1:-1] for n in surface_normal(haloed, dx, dy))
            data["elevation"] = haloed[1:-1, 1:-1]
    stats = {}
    if value_stats:
        stats = {role: input_stats(role, values) for role, values in data.items()}
    data.pop("cloud_mask", None)
    if ctx.remap:
        data["land_cover"], stats["land_cover_unmapped"] = remap_codes(
            data["land_cover"], dict(ctx.remap)
        )
    if value_stats:
        stats["land_cover_known"] = known_cover_counts(data["land_cover"], ctx.lookups.known)
    lon, lat, sun = pixel_geometry(ctx.grid, rows, cols, ctx.constants)
    day = daily_sun(ctx.grid, rows, cols, ctx.constants.day_of_year) if daily else None
    window_index = prior_counts = None
    if candidates_only:
        # the pixels that pass the first two screens (surface, vegetation) for either role
        codes = land_cover_codes(data["land_cover"])
        lk = ctx.lookups
        rules = surface_rules(
            codes,
            data.get("ndvi"),
            lk.cold_anchor,
            lk.hot_anchor,
            lk.residual_reliable,
            ctx.constants.screens,
        )
        keep = (rules["cold"][1] | rules["hot"][1]) & np.isfinite(data["land_cover"])
        prior_counts = [
            [codes.size, *(np.count_nonzero(m) for m in rules[role])] for role in ("cold", "hot")
        ]
        window_index = np.flatnonzero(keep)

        def pick(values):
            return values.reshape(-1)[window_index]

        data = {k: pick(v) for k, v in data.items()}
        lon, lat, sun = pick(lon), pick(lat), tuple(pick(s) for s in sun)
        normal = None if normal is None else tuple(pick(n) for n in normal)
        day = None if day is None else type(day)(*(pick(x) for x in day))
        masked = None if masked is None else pick(masked)
        features = None if features is None else {k: pick(v) for k, v in features.items()}
    state = surface_block(
        ctx.constants,
        ctx.lookups,
        data["albedo"],
        data["surface_temperature"],
        data["land_cover"],
        lat,
        lon,
        ndvi=data.get("ndvi"),
        elevation=data.get("elevation"),
        normal=normal,
        sun=sun,
        daily=daily,
        masked=masked,
        weather=gridded_weather_in_si(data),
        features=features,
        daily_sun=day,
    )
    for name in ("hourly_raster", "daily_raster"):  # gridded reference ET, if given
        if name in data:
            state[f"reference_et_{name.split('_')[0]}"] = data[name]
    if prior_counts is not None:  # all, surface, vegetation counted before the pick
        state["candidate_counts"][:, :3] = prior_counts
    state["input_stats"] = stats
    # wind at the blending height, per pixel from a wind grid or the station's one value
    if "wind_speed_m_s" in data and ctx.wind_profile is not None:
        height, station_roughness, blending_height = ctx.wind_profile
        state["blending_wind_speed"] = turbulence.wind_speed_at_blending_height(
            data["wind_speed_m_s"], height, station_roughness, blending_height
        )
    else:
        state["blending_wind_speed"] = np.full(state["qa"].shape, ctx.blending_wind_speed)
    if window_index is not None:
        state["window_index"] = window_index
    if carry is not None:
        state["carried"] = carry
    return state


#: Per input and block: valid pixels, all pixels, min, max, and a unit-suspicion count
#: (albedo above 1.5, surface temperature below 100 K).
def input_stats(role: str, values: np.ndarray) -> np.ndarray:
    finite = values[np.isfinite(values)]
    if role == "albedo" or _is_reflectance(role):  # fractions
        suspicious = np.count_nonzero(finite > 1.5)
    elif role == "surface_temperature":  # kelvin: below 100 is Celsius, above 1000 counts
        suspicious = np.count_nonzero((finite < 100.0) | (finite > 1000.0))
    elif role == "land_cover":  # class codes are whole numbers
        suspicious = np.count_nonzero(finite != np.round(finite))
    elif role == "elevation":  # below the Dead Sea or above Everest: nodata or wrong units
        suspicious = np.count_nonzero((finite < ELEVATION_RANGE[0]) | (finite > ELEVATION_RANGE[1]))
    else:
        suspicious = 0
    low = finite.min() if finite.size else np.inf
    high = finite.max() if finite.size else -np.inf
    return np.array([finite.size, values.size, low, high, suspicious], dtype=np.float64)


#: Plausible elevations [m] (Dead Sea shore, Everest summit; rounded).
ELEVATION_RANGE = (-450.0, 8900.0)


def _is_reflectance(role: str) -> bool:
    return role in INPUTS and INPUTS[role].section == "product" and INPUTS[role].units == "1"


def known_cover_counts(land_cover: np.ndarray, known: np.ndarray) -> np.ndarray:
    """Pixels with a land-cover value, and those whose code the class table knows
    (``known``: its 256-entry lookup), for the check that a map holds some known code."""
    finite = np.isfinite(land_cover)
    return np.array(
        [np.count_nonzero(finite), np.count_nonzero(known[land_cover_codes(land_cover)] & finite)]
    )


def remap_codes(codes: np.ndarray, mapping: dict[int, int]) -> tuple[np.ndarray, dict]:
    """Map a user's land-cover codes to class codes; count the codes the table leaves unmapped."""
    finite = np.isfinite(codes)
    values = codes[finite].astype(np.int64)
    present, counts = np.unique(values, return_counts=True)
    unmapped = {int(v): int(n) for v, n in zip(present, counts, strict=True) if v not in mapping}
    out = np.full(codes.shape, np.nan)
    keys = np.array(sorted(mapping), dtype=np.int64)
    targets = np.array([mapping[k] for k in keys], dtype=np.float64)
    where = np.searchsorted(keys, values).clip(0, keys.size - 1)
    hit = keys[where] == values
    mapped = np.full(values.shape, np.nan)
    mapped[hit] = targets[where[hit]]
    out[finite] = mapped
    return out, unmapped


def merge_input_stats(a: dict, b: dict) -> dict:
    out = {}
    for role in a:
        if role == "land_cover_known":  # pixels with a land-cover value, and with a known class
            out[role] = a[role] + b[role]
            continue
        if role == "land_cover_unmapped":
            merged = dict(a[role])
            for code, n in b[role].items():
                merged[code] = merged.get(code, 0) + n
            out[role] = merged
            continue
        x, y = a[role], b[role]
        out[role] = np.array(
            [x[0] + y[0], x[1] + y[1], min(x[2], y[2]), max(x[3], y[3]), x[4] + y[4]]
        )
    return out


def check_input_values(stats: dict, sources: tuple[InputSource, ...]) -> dict:
    """Refuse inputs that are all nodata or hold values in the wrong units; return a summary."""
    summary = {}
    unmapped = stats.get("land_cover_unmapped")
    if unmapped:
        listed = ", ".join(f"{code} ({n} pixels)" for code, n in sorted(unmapped.items())[:20])
        raise InputValueError(
            f"land-cover codes not in the remap table: {listed}; add them to the table named "
            "by inputs.land_cover.remap."
        )
    with_cover, known = stats.get("land_cover_known", (0, 0))
    cover = next((s for s in sources if s.role == "land_cover"), None)
    if cover is not None and with_cover > 0 and known == 0:
        raise InputValueError(
            f"land-cover raster {cover.path} holds no code of the class table on the grid; "
            "map your codes with inputs.land_cover.remap, or name your own run.class_table."
        )
    for source in sources:
        n_valid, n_total, low, high, suspicious = stats[source.role]
        where = f"inputs.{source.role}"
        if n_valid == 0 and source.role != "cloud_mask":
            raise InputValueError(
                f"{source.role} raster {source.path} holds no valid pixel on the albedo grid "
                f"(all nodata); check the file and its nodata value ({where})."
            )
        if source.role == "albedo" and suspicious > 0.5 * n_valid:
            raise InputValueError(
                f"albedo raster {source.path} has values up to {high:.3g} (most above 1.5): it "
                f'looks like percent; set {where} = {{ path = "...", units = "percent" }}, '
                "or a scale factor."
            )
        if _is_reflectance(source.role) and suspicious > 0.5 * n_valid:
            raise InputValueError(
                f"{source.role} band {source.path} reads as values up to {high:.3g} (most above "
                "1.5), not reflectances: it looks like unscaled digital numbers; set "
                "product.reflectance_scale and product.reflectance_offset (Collection 2 Level-2: "
                "0.0000275 and -0.2)."
            )
        if source.role == "surface_temperature" and suspicious > 0.5 * n_valid and high > 1000:
            raise InputValueError(
                f"surface temperature raster {source.path} reads as values up to {high:.6g} "
                "(most above 1000): it looks like scaled integers; give its scale and offset "
                "(inputs.surface_temperature, or product.temperature_scale/offset)."
            )
        if source.role == "surface_temperature" and suspicious > 0.5 * n_valid:
            raise InputValueError(
                f"surface temperature raster {source.path} has a median below 100 (values "
                f"{low:.1f} to {high:.1f}): it looks like degrees Celsius; set {where} = "
                f'{{ path = "...", units = "C" }}, or a scale/offset.'
            )
        if source.role == "land_cover" and suspicious > 0:
            raise InputValueError(
                f"land-cover raster {source.path} holds {int(suspicious)} values that are not "
                "whole numbers (class codes are): a continuous raster given as land cover? "
                "Give the class-code raster (or none: surfaces are then recognised from NDVI)."
            )
        if source.role == "elevation" and suspicious > 0:
            raise InputValueError(
                f"elevation raster {source.path} has values from {low:.4g} to {high:.4g} m, "
                f"outside {ELEVATION_RANGE[0]:g} to {ELEVATION_RANGE[1]:g} m on "
                f"{int(suspicious)} pixels: an unset nodata value or other units? Set "
                'inputs.elevation = { path = "...", nodata = ... } or its scale.'
            )
        summary[source.role] = {
            "valid_fraction": n_valid / n_total if n_total else 0.0,
            "min": low,
            "max": high,
        }
    return summary


def mask_pixels(mask: np.ndarray, values: tuple[int, ...], bits: tuple[int, ...]) -> np.ndarray:
    """True where the cloud/QA mask holds a value to drop or has any of the given bits set.

    Pixels outside the mask raster (nodata) are kept: the mask only removes what it flags.
    """
    finite = np.isfinite(mask)
    codes = np.where(finite, mask, 0).astype(np.int64)
    drop = np.isin(codes, values) if values else np.zeros(mask.shape, dtype=bool)
    for bit in bits:
        drop |= (codes >> bit) & 1 == 1
    return drop & finite


def pass1_block(ctx: BlockContext, carried, location):
    """Pass 1 for one block: read, surface state, then the method's partial reduction.

    ``carried``: the scratch raster (a writer) that receives the block's neighbourhood results
    (CARRIED_* bits) for pass 2, or None when there is no neighbourhood work.
    """
    (r0, r1), (c0, c1) = location
    method = get_method(ctx.method)
    state = block_state(
        ctx,
        slice(r0, r1),
        slice(c0, c1),
        daily=False,
        candidates_only=method.pass1_candidates_only,
        value_stats=True,
    )
    if carried is not None:
        carried[slice(r0, r1), slice(c0, c1)] = state["carried"]
    return method.pass1_block(state, location, ctx), state["input_stats"]


@dataclass(frozen=True)
class Pass2Parameters:
    """What pass 2 needs from pass 1: the variables to stack and the method's parameters."""

    variables: tuple[str, ...]
    method_params: Any = None
    members: tuple = ()  # the method's ensemble members' parameters
    member_fractions: bool = False  # add each member's reference-ET fraction as a layer


def pass2_block(ctx: BlockContext, p: Pass2Parameters, location) -> np.ndarray:
    """Pass 2 for one block: read, all fluxes and QA, stacked along a leading variable axis."""
    (r0, r1), (c0, c1) = location
    state = block_state(ctx, slice(r0, r1), slice(c0, c1))
    qa = state["qa"]
    valid = state["valid"]
    ts = state["surface_temperature"]
    rn, g, available = state["net_radiation"], state["ground_heat_flux"], state["available_energy"]

    method = get_method(ctx.method)
    inverse_length = np.zeros(ts.shape)
    h, converged = method.sensible_heat_block(state, p.method_params, ctx.constants, inverse_length)
    le_raw = partition.latent_heat_residual(rn, g, h)
    # LE may exceed Rn - G only by max_evaporative_fraction (advection: H < 0); default 1
    ceiling = ctx.constants.max_evaporative_fraction * available
    le = partition.clip_latent_heat(le_raw, ceiling)
    with np.errstate(invalid="ignore"):
        clipped_low = valid & (le_raw < 0)
        clipped_high = valid & (le_raw > np.maximum(ceiling, 0.0))
    h = available - le  # closure Rn = G + H + LE holds after clipping
    ef = partition.evaporative_fraction(le, available)
    lam = turbulence.latent_heat_of_vaporization(ts)
    lam_daily = turbulence.latent_heat_of_vaporization(
        0.5 * (ctx.constants.tmax + ctx.constants.tmin)
    )
    et_hourly = partition.et_depth(le, lam, SECONDS_PER_HOUR)
    # A negative daily net radiation (snow, some nights-dominated days) evaporates nothing.
    et_daily = partition.et_daily_from_evaporative_fraction(
        ef, np.maximum(state["net_radiation_daily"], 0.0), lam_daily
    )

    def bit(mask, flag):
        return np.where(mask, np.uint16(flag), np.uint16(0))

    qa = qa | bit(clipped_low, QA.LATENT_HEAT_CLIPPED_AT_ZERO)
    qa |= bit(clipped_high, QA.LATENT_HEAT_CLIPPED_AT_AVAILABLE)
    qa |= bit(valid & ~converged, QA.STABILITY_NOT_CONVERGED)
    method_bits = method.qa_block(state, p.method_params, location)
    if method_bits is not None:
        qa |= method_bits
    c = ctx.constants
    # the station's reference ET, or the pixel's own where the recipe gives it as rasters
    hourly_reference = state.get("reference_et_hourly", c.reference_et_hourly)
    daily_reference = state.get("reference_et_daily", c.reference_et_daily)
    fraction = reference_fraction(et_hourly, hourly_reference)
    if c.daily_scaling == "reference_et_fraction":
        et_daily = fraction * daily_reference
    ensemble, member_fractions = {}, None
    if p.members:
        runs = method.ensemble_block(
            state, p.method_params, p.members, c, valid, lam, inverse_length
        )
        # each member's own view of reference ET: the station's (or pixel's) times its factor
        factor = np.array([m.reference_et_factor for m, _ in p.members])[:, None, None]
        member_fractions = reference_fraction(runs.pop("et_hourly"), hourly_reference, factor)
        if c.daily_scaling == "reference_et_fraction":
            member_daily = member_fractions * (factor * daily_reference)
        else:
            member_daily = partition.et_daily_from_evaporative_fraction(
                runs["evaporative_fraction"],
                np.maximum(state["net_radiation_daily"], 0.0),
                lam_daily,
            )
        del runs  # the members' arrays are a block's size each: no more alive than needed
        low, high = ensemble_percentiles(member_daily, overwrite=True)
        ensemble = {"et_daily_p10": low, "et_daily_p90": high}

    values = {
        **ensemble,
        "reference_et_fraction": fraction,
        "net_radiation": rn,
        "ground_heat_flux": g,
        "sensible_heat_flux": h,
        "latent_heat_flux": le,
        "evaporative_fraction": ef,
        "et_hourly": et_hourly,
        "et_daily": et_daily,
        "shortwave_in": state["shortwave_in"],
        "longwave_in": state["longwave_in"],
        "longwave_out": state["longwave_out"],
        "net_radiation_daily": state["net_radiation_daily"],
        "albedo": state["albedo"],
        "surface_temperature": ts,
        "surface_class": np.where(np.isfinite(state["albedo"]), state["codes"], 0),
        QA_OUTPUT: qa,
        "land_cover_code": state["codes"],
    }
    out = np.stack([np.asarray(values[v], dtype=np.float32) for v in p.variables])
    if p.member_fractions:  # one layer per member after the variables
        out = np.concatenate([out, member_fractions.astype(np.float32)])
    return out


def reference_fraction(et_hourly, hourly_reference, factor=1.0) -> np.ndarray:
    """ET at overpass over the hourly reference ET (times ``factor``, a member's own view of
    reference ET) [-]; NaN where there is no positive reference ET."""
    if hourly_reference is None or not np.any(np.asarray(hourly_reference) > 0):
        return np.full(np.shape(et_hourly), np.nan)
    reference = factor * np.asarray(hourly_reference)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(reference > 0, et_hourly / reference, np.nan)


def combine_block_summaries(a, b):
    """Two blocks' summaries (:func:`block_summary`) as one."""
    hists = dict(a[0])
    for key, hist in b[0].items():
        hists[key] = hist.merge(hists.get(key))
    moments = a[1].copy()
    moments[..., :3] += b[1][..., :3]
    moments[..., 3] = np.minimum(a[1][..., 3], b[1][..., 3])
    moments[..., 4] = np.maximum(a[1][..., 4], b[1][..., 4])
    return hists, moments, a[2] + b[2], {**a[3], **b[3]}


def _decimated(block: np.ndarray, index: list[int], step: int, r0: int, c0: int) -> np.ndarray:
    """The block's pixels on the scene-wide lattice of every ``step``-th row and column."""
    return block[index, (-r0) % step :: step, (-c0) % step :: step].astype(np.float32)


def block_summary(
    block: np.ndarray,
    location,
    variables: tuple[str, ...],
    class_codes: list[int],
    thumbnail: tuple[list[int], int] | None = None,
):
    """Per-class histograms and moments of one pass-2 block, its pixels per QA bit and, given
    ``thumbnail = (variable indices, step)``, its quick-look pixels keyed by (r0, c0).

    Quick-look pixels come from this task rather than tasks of their own: as separate leaf tasks
    dask ran them late and held the pass-2 blocks until then (+350 MB at 1024 blocks; the peak
    grew with the block count).
    """
    (r0, _), (c0, _) = location
    values = {name: block[variables.index(name)] for name in HISTOGRAM_RANGES if name in variables}
    codes = block[variables.index("land_cover_code")].astype(np.intp)
    qa = block[variables.index(QA_OUTPUT)].astype(np.uint16)
    qa_counts = np.array([np.count_nonzero(qa & np.uint16(b)) for b in QA], dtype=np.int64)
    thumbs = {}
    if thumbnail is not None:
        index, step = thumbnail
        thumbs[r0, c0] = _decimated(block, index, step, r0, c0)
    return (*class_histograms(values, codes, class_codes), qa_counts, thumbs)
