"""Quicklook PNG maps of a product, for a glance (not for analysis).

The raster is read decimated (``rasterio`` ``out_shape``, which GDAL serves from
the COG's overviews), so memory stays at about ``max_pixels**2`` values
whatever the scene size.  Figures are drawn on a private
:class:`matplotlib.figure.Figure` with the Agg canvas: no pyplot, no global
state.

Colours: limits from the 2nd-98th percentiles; a diverging map centred on zero
where a signed product's limits straddle zero (red = energy gained by the surface,
blue = lost: ``RdBu_r``, or ``RdBu`` for net longwave, whose positive values are a
loss), a sequential one (``viridis``) where they have one sign; NaN is light grey.  Counts (valid dates of a composite) get one colour
per whole number and integer ticks.  Quality bit flags are drawn as discrete
categories (one per bit combination present) with a legend.  Directions (a terrain's aspect) take a
cyclic colour map (``hsv``) over 0-360 deg with the compass points marked.
:func:`write_side_by_side` draws two maps of one quantity on one colour scale (level ground vs
terrain).
"""

from __future__ import annotations

import math
import os
import textwrap
from pathlib import Path
from typing import Mapping

import numpy as np
import rasterio
import shapely
from matplotlib import colormaps, colors, patheffects
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator
from pyproj import CRS
from rasterio.enums import Resampling

from .._version import __version__
from ..errors import InputError
from ..io.atomic import atomic_output
from ..io.vectors import Zones

__all__ = ["write_quicklook", "write_side_by_side", "read_decimated", "FIGSIZE", "DPI", "PERCENTILES",
           "NAN_COLOUR"]

FIGSIZE = (8.0, 6.5)     # inches
DPI = 100                # -> 800 x 650 px
PERCENTILES = (2, 98)    # colour limits of continuous products
NAN_COLOUR = "#d4d4d4"   # light grey
DIVERGING_CMAP = "RdBu_r"
SEQUENTIAL_CMAP = "viridis"
CYCLIC_CMAP = "hsv"
NO_FLAGS_COLOUR = "#eef6e6"  # pale: a clean pixel should not draw the eye
OTHER_COLOUR = "0.45"
# flagged combinations: tab20's strong colours, then its light ones, without greens and greys
# (kept apart from "no flags" and from no data)
FLAG_COLOURS = [c for i, c in enumerate(colormaps["tab20"].colors) if i % 2 == 0 and i not in (4, 14)] + \
               [c for i, c in enumerate(colormaps["tab20"].colors) if i % 2 == 1 and i not in (5, 15)]
MAX_CATEGORIES = 12      # bit combinations shown individually; the rest are "other"
MAX_ZONE_LABELS = 60     # more zones than this: outlines only


def _read_decimated(src, max_pixels: int, categorical: bool) -> np.ndarray:
    factor = max(1, math.ceil(max(src.width, src.height) / max_pixels))
    shape = (max(1, math.ceil(src.height / factor)), max(1, math.ceil(src.width / factor)))
    resampling = Resampling.nearest if categorical else Resampling.average
    data = src.read(1, out_shape=shape, resampling=resampling)
    if categorical:
        nodata = src.nodata if src.nodata is not None else 255
        return np.ma.masked_equal(data, nodata)
    data = data.astype(np.float32, copy=False)
    if src.nodata is not None and not np.isnan(src.nodata):
        data[data == src.nodata] = np.nan
    return np.ma.masked_invalid(data)


def read_decimated(tif_path: str | os.PathLike, max_pixels: int = 1000):
    """A product read decimated (from its overviews): (masked data, bounds, CRS)."""
    try:
        with rasterio.open(tif_path) as src:
            return _read_decimated(src, int(max_pixels), False), tuple(src.bounds), src.crs
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"{tif_path}: cannot open for a quicklook ({exc}); check the product was written") from None


def _axes_frame(crs) -> tuple[float, str, str, float]:
    """(scale to plot units, x label, y label, aspect) for a raster CRS."""
    if crs is None:
        return 1.0, "x [CRS units]", "y [CRS units]", 1.0
    crs = CRS.from_user_input(crs)
    name = f"EPSG:{crs.to_epsg()}" if crs.to_epsg() else crs.name
    if crs.is_geographic:
        return 1.0, f"longitude [deg]  ({name})", "latitude [deg]", math.nan  # aspect set from latitude
    unit = crs.axis_info[0].unit_name if crs.axis_info else "metre"
    if unit in ("metre", "meter"):
        return 1e-3, f"x [km]  ({name})", "y [km]", 1.0
    return 1.0, f"x [{unit}]  ({name})", f"y [{unit}]", 1.0


def _continuous(ax, fig, data, extent, *, bar_label: str, diverging: bool, positive: str | None):
    """A continuous colour bar: diverging around zero only where the colour limits straddle it."""
    finite = data.compressed()
    if finite.size:
        lo, hi = (float(v) for v in np.percentile(finite, PERCENTILES))
    else:
        lo, hi = 0.0, 1.0
    # one sign between the colour limits (every value, or all but a few outliers): a sequential map,
    # so the whole colour range describes the values instead of half of it lying unused
    diverging = diverging and lo < 0 < hi
    if diverging:
        # red = energy gained by the surface, blue = lost: RdBu_r when positive means a gain,
        # RdBu (reversed) when positive means a loss (net longwave), so colours read alike on every map
        name = DIVERGING_CMAP if positive != "loss" else DIVERGING_CMAP.removesuffix("_r")
        norm = colors.TwoSlopeNorm(vcenter=0.0, vmin=lo, vmax=hi)
    else:
        name = SEQUENTIAL_CMAP
        if hi <= lo:
            lo, hi = lo - (abs(lo) * 0.01 or 1.0), hi + (abs(hi) * 0.01 or 1.0)
        norm = colors.Normalize(lo, hi)
    cmap = colormaps[name].with_extremes(bad=NAN_COLOUR)
    image = ax.imshow(data, cmap=cmap, norm=norm, extent=extent, interpolation="nearest", origin="upper")
    below = finite.size and finite.min() < norm.vmin
    above = finite.size and finite.max() > norm.vmax
    extend = {(True, True): "both", (True, False): "min", (False, True): "max"}.get((bool(below), bool(above)),
                                                                                   "neither")
    bar = fig.colorbar(image, ax=ax, extend=extend, shrink=0.9, pad=0.02)
    bar.set_label(bar_label)
    if diverging and positive in ("gain", "loss"):
        ends = ("surface gains", "surface loses") if positive == "gain" else ("surface loses", "surface gains")
        bar.ax.text(0.5, 1.06, ends[0], transform=bar.ax.transAxes, ha="center", va="bottom", fontsize=7)
        bar.ax.text(0.5, -0.06, ends[1], transform=bar.ax.transAxes, ha="center", va="top", fontsize=7)
    if finite.size == 0:
        ax.text(0.5, 0.5, "no valid pixels", transform=ax.transAxes, ha="center", va="center",
                fontsize=12, color="0.25")
    else:
        limits = f"{_ordinal(PERCENTILES[0])}-{_ordinal(PERCENTILES[1])} percentile"
        note = f"colour limits: {limits}; grey = no value"
        other = int(np.sum(finite < 0) if lo >= 0 else np.sum(finite > 0) if hi <= 0 else 0)
        if other:   # a one-signed scale over a few values of the other sign: say how many
            sign = "below" if lo >= 0 else "above"
            note += f"; {other / finite.size:.2%} of the pixels are {sign} 0 (drawn in the end colour)"
        fig.text(0.01, 0.01, note, fontsize=7, color="0.35")


def _cyclic(ax, fig, data, extent, *, bar_label: str):
    """Directions clockwise from north [deg]: a cyclic map over 0-360, ticks at the compass points."""
    cmap = colormaps[CYCLIC_CMAP].with_extremes(bad=NAN_COLOUR)
    image = ax.imshow(data, cmap=cmap, norm=colors.Normalize(0.0, 360.0), extent=extent, interpolation="nearest",
                      origin="upper")
    bar = fig.colorbar(image, ax=ax, shrink=0.9, pad=0.02, ticks=[0, 90, 180, 270, 360])
    bar.ax.set_yticklabels(["N 0", "E 90", "S 180", "W 270", "N 360"])
    bar.set_label(bar_label)
    fig.text(0.01, 0.01, "cyclic colours: 0 and 360 deg (north) meet; grey = no value (flat or no data)",
             fontsize=7, color="0.35")


def _counts(ax, fig, data, extent, *, bar_label: str, most: int):
    """Whole numbers 0..most (e.g. valid dates per pixel) as one colour each, integer ticks."""
    finite = data.compressed()
    top = int(max(most, np.ceil(finite.max()) if finite.size else 0, 1))
    cmap = colormaps[SEQUENTIAL_CMAP].resampled(top + 1).with_extremes(bad=NAN_COLOUR)
    norm = colors.BoundaryNorm(np.arange(-0.5, top + 1.0), cmap.N)
    image = ax.imshow(data, cmap=cmap, norm=norm, extent=extent, interpolation="nearest", origin="upper")
    bar = fig.colorbar(image, ax=ax, shrink=0.9, pad=0.02)
    bar.ax.yaxis.set_major_locator(MaxNLocator(nbins=min(top + 1, 12), integer=True))
    bar.ax.minorticks_off()
    bar.set_label(bar_label)
    fig.text(0.01, 0.01, f"one colour per count, 0 to {top}; grey = no value", fontsize=7, color="0.35")


def _ordinal(n: int) -> str:
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _flag_label(value: int, bits: Mapping[str, int]) -> str:
    if value == 0:
        return "0: no flags"
    names = [name for name, bit in bits.items() if value & bit]
    unknown = value & ~sum(bits.values())
    if unknown:
        names.append(f"bits {unknown}")
    return textwrap.fill(f"{value}: " + " + ".join(names), width=26, subsequent_indent="   ")


def _categorical(ax, data, extent, *, bits: Mapping[str, int]):
    valid = ~np.ma.getmaskarray(data)
    values, counts = np.unique(data.compressed(), return_counts=True)
    keep = values
    if values.size > MAX_CATEGORIES:  # keep the most frequent, lump the rest into "other"
        keep = np.sort(values[np.argsort(counts)[::-1][:MAX_CATEGORIES - 1]])
    other = values.size > keep.size
    raw = np.ma.getdata(data)
    index = np.full(data.shape, -1, dtype=np.int16)
    for k, v in enumerate(keep):
        index[valid & (raw == v)] = k
    index[valid & (index < 0)] = keep.size  # "other"
    shown, flagged = [], iter(FLAG_COLOURS)
    for v in keep:
        shown.append(NO_FLAGS_COLOUR if v == 0 else next(flagged))
    if other:
        shown.append(OTHER_COLOUR)
    cmap = colors.ListedColormap(shown or [OTHER_COLOUR]).with_extremes(bad=NAN_COLOUR)
    norm = colors.BoundaryNorm(np.arange(-0.5, max(len(shown), 1) + 0.5), cmap.N)
    ax.imshow(np.ma.masked_less(index, 0), cmap=cmap, norm=norm, extent=extent, interpolation="nearest",
              origin="upper")
    labels = [_flag_label(int(v), bits) for v in keep] + (["other combinations"] if other else [])
    handles = [Patch(facecolor=c, edgecolor="0.3", label=t) for c, t in zip(shown, labels)]
    handles.append(Patch(facecolor=NAN_COLOUR, edgecolor="0.3", label="no data"))
    ax.legend(handles=handles, title="value: flags set", loc="upper left", bbox_to_anchor=(1.02, 1.0),
              fontsize=8, title_fontsize=8, frameon=False, borderaxespad=0.0)


def _draw_zones(ax, zones: Zones, crs, scale: float, extent):
    if crs is not None:
        zones = zones.to_crs(crs)
    halo = [patheffects.withStroke(linewidth=2.5, foreground="white")]
    frame = shapely.box(extent[0] / scale, extent[2] / scale, extent[1] / scale, extent[3] / scale)
    label = len(zones) <= MAX_ZONE_LABELS
    for zone_id, geom in zip(zones.ids, zones.geometries):
        for part in shapely.get_parts(geom):
            for ring in [part.exterior, *part.interiors]:
                xy = np.asarray(ring.coords) * scale
                ax.plot(xy[:, 0], xy[:, 1], color="0.1", linewidth=0.8)
        visible = shapely.intersection(geom, frame) if label else None
        if visible is not None and not visible.is_empty:  # label the part of the zone on the map
            p = shapely.point_on_surface(visible)
            ax.text(p.x * scale, p.y * scale, str(zone_id), fontsize=9, ha="center", va="center",
                    color="0.05", path_effects=halo, clip_on=True)


def write_quicklook(tif_path: str | os.PathLike, png_path: str | os.PathLike, *, title: str, units: str,
                    diverging: bool, zones: Zones | None = None, categorical_bits: Mapping[str, int] | None = None,
                    max_pixels: int = 1000, label: str | None = None, positive: str | None = None,
                    counts: int | None = None, cyclic: bool = False) -> Path:
    """Draw a product GeoTIFF as an ~800 x 650 px PNG map (atomic write).

    Parameters
    ----------
    tif_path : str or path-like
        Single-band product GeoTIFF (ideally a COG with overviews).
    png_path : str or path-like
        PNG to write; its folder must exist.
    title : str
        Title text, e.g. ``"net radiation 2026-07-14 18:10 UTC"``.
    units : str
        Units of the colour bar, e.g. ``"W m-2"``.
    diverging : bool
        The product may take both signs (net radiation): where its values do, the colour
        map is diverging and centred on zero; where every value has one sign, sequential.
    zones : Zones, optional
        Polygons drawn as thin dark outlines with their ids (reprojected to the raster CRS if needed).
    categorical_bits : mapping of str to int, optional
        Bit flags (e.g. ``products.SCENE_QUALITY_BITS``): draw the raster as discrete
        bit combinations with a legend instead of a colour bar; nodata (the
        file's, else 255) is grey.
    max_pixels : int, optional
        Longest side of the decimated read [pixel]; bounds memory.
    label : str, optional
        The quantity on the colour bar, before the units: ``"{label} [{units}]"``.
    positive : {"gain", "loss"}, optional
        What a positive value means for the surface.  A diverging map then draws gains
        red and losses blue (``RdBu_r``, or ``RdBu`` when positive means a loss) and
        names the two ends of its colour bar.
    counts : int, optional
        Draw whole numbers 0..``counts`` (e.g. valid dates of a composite), one colour
        each, with integer ticks.
    cyclic : bool, optional
        Directions in degrees clockwise from north (a terrain's aspect): a cyclic colour
        map over 0-360.
    """
    tif_path, png_path = str(tif_path), Path(png_path)
    categorical = categorical_bits is not None
    try:
        with rasterio.open(tif_path) as src:
            data = _read_decimated(src, int(max_pixels), categorical)
            left, bottom, right, top = src.bounds
            crs = src.crs
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"{tif_path}: cannot open for a quicklook ({exc}); check the product was written") from None

    scale, xlabel, ylabel, aspect = _axes_frame(crs)
    extent = (left * scale, right * scale, bottom * scale, top * scale)
    # a fixed layout: constrained layout drew every figure twice and doubled the time per PNG
    fig = Figure(figsize=FIGSIZE, dpi=DPI)
    FigureCanvasAgg(fig)
    fig.subplots_adjust(left=0.09, right=0.72 if categorical else 0.97, bottom=0.11, top=0.91)
    ax = fig.add_subplot()
    ax.set_facecolor("white")
    if categorical:
        _categorical(ax, data, extent, bits=categorical_bits)
    elif counts is not None:
        _counts(ax, fig, data, extent, bar_label=f"{label} [{units}]" if label else units, most=int(counts))
    elif cyclic:
        _cyclic(ax, fig, data, extent, bar_label=f"{label} [{units}]" if label else units)
    else:
        _continuous(ax, fig, data, extent, bar_label=f"{label} [{units}]" if label else units,
                    diverging=diverging, positive=positive)
    if zones is not None and len(zones):
        _draw_zones(ax, zones, crs, scale, extent)
    _frame(ax, extent, aspect, (bottom, top), xlabel, ylabel)
    ax.set_title(textwrap.fill(title, 70), fontsize=11)
    return _save(fig, png_path)


def _frame(ax, extent, aspect, lat_range, xlabel, ylabel):
    ax.set_xlim(extent[0], extent[1])
    ax.set_ylim(extent[2], extent[3])
    if math.isnan(aspect):  # geographic: a degree of longitude is shorter than one of latitude
        aspect = 1.0 / max(math.cos(math.radians(sum(lat_range) / 2)), 0.05)
    ax.set_aspect(aspect)
    ax.ticklabel_format(useOffset=False, style="plain")
    ax.set_xlabel(xlabel, fontsize=9)
    ax.set_ylabel(ylabel, fontsize=9)
    ax.tick_params(labelsize=8)


def _save(fig, png_path: Path) -> Path:
    with atomic_output(png_path) as tmp:
        # zlib level 1: PNG encoding was a third of a quicklook's time at PIL's default (6); ~1.2x larger
        fig.savefig(tmp, format="png", dpi=DPI, metadata={"Software": f"radledger {__version__}"},
                    pil_kwargs={"compress_level": 1})
    return png_path


def write_side_by_side(left: np.ndarray, right: np.ndarray, png_path: str | os.PathLike, *, bounds, crs,
                       title: str, titles: tuple[str, str], label: str, units: str,
                       zones: Zones | None = None) -> Path:
    """Two maps of one quantity over the same bounds on one colour scale, and their difference.

    ``left`` and ``right`` (2-D, NaN or masked = no value, same shape) cover ``bounds`` (left,
    bottom, right, top in ``crs``); limits are the 2nd-98th percentiles of both together.  A third
    panel draws ``right - left`` on a diverging scale centred on zero.
    """
    left, right = (np.ma.masked_invalid(np.ma.filled(np.ma.asarray(a, dtype=np.float32), np.nan))
                   for a in (left, right))
    scale, xlabel, ylabel, aspect = _axes_frame(crs)
    extent = (bounds[0] * scale, bounds[2] * scale, bounds[1] * scale, bounds[3] * scale)
    both = np.concatenate([left.compressed(), right.compressed()])
    lo, hi = (float(v) for v in np.percentile(both, PERCENTILES)) if both.size else (0.0, 1.0)
    hi = hi if hi > lo else lo + 1.0
    diff = right - left
    spread = float(np.percentile(np.abs(diff.compressed()), PERCENTILES[1])) if diff.count() else 1.0
    fig = Figure(figsize=(15.0, 4.3), dpi=DPI)
    FigureCanvasAgg(fig)
    fig.subplots_adjust(left=0.05, right=0.98, bottom=0.1, top=0.9, wspace=0.28)
    panels = [(left, titles[0], colors.Normalize(lo, hi), SEQUENTIAL_CMAP, f"{label} [{units}]"),
              (right, titles[1], colors.Normalize(lo, hi), SEQUENTIAL_CMAP, f"{label} [{units}]"),
              (diff, "difference (right - left)", colors.TwoSlopeNorm(0.0, -max(spread, 1e-6), max(spread, 1e-6)),
               "RdBu_r", f"difference [{units}]")]
    for k, (data, sub, norm, cmap, bar_label) in enumerate(panels):
        ax = fig.add_subplot(1, 3, k + 1)
        image = ax.imshow(data, cmap=colormaps[cmap].with_extremes(bad=NAN_COLOUR), norm=norm, extent=extent,
                          interpolation="nearest", origin="upper")
        fig.colorbar(image, ax=ax, shrink=0.8, pad=0.02, extend="both").set_label(bar_label, fontsize=8)
        if zones is not None and len(zones):
            _draw_zones(ax, zones, crs, scale, extent)
        _frame(ax, extent, aspect, (bounds[1], bounds[3]), xlabel, ylabel)
        ax.set_title(textwrap.fill(sub, 45), fontsize=9)
    fig.suptitle(textwrap.fill(title, 120), fontsize=11, y=0.985)
    fig.text(0.01, 0.01, "colour limits: 2nd-98th percentile of both maps (difference: 98th percentile of its size); "
             "grey = no value", fontsize=7, color="0.35")
    return _save(fig, Path(png_path))
