"""What each product is: quantity, units, CF names, data type and how to draw it.

One table, used by the pipeline (which products exist), the writers (tags,
NetCDF attributes) and the quicklooks (colour map, diverging or not).
"""

from __future__ import annotations

from dataclasses import dataclass

from ..kinds import TimeKind

__all__ = ["Product", "SCENE_PRODUCTS", "DAY_PRODUCTS", "DEFAULT_PRODUCTS", "product_info",
           "SCENE_QUALITY_BITS", "DAY_QUALITY_BITS", "quality_bits", "SCENE_DAY_PRODUCT", "QUALITY_NODATA", "COMPOSITE_STATISTICS",
           "ALL_PRODUCT_NAMES", "TERRAIN_PRODUCTS", "terrain_product"]

# quality: uint8 bit flags; 255 marks pixels outside the grid's data (never set otherwise).
QUALITY_NODATA = 255


# quality: uint8 bit flags, one table per time kind (the names are unique across both); 255 marks
# pixels outside the grid's data and never occurs otherwise: every bit of both tables is in use, but
# no pixel can carry all of them (sun_down and low_sun exclude each other, as do shortwave_capped and
# overcast_held, and albedo_default, albedo_interpolated and albedo_held).
SCENE_QUALITY_BITS: dict[str, int] = {
    "input_missing": 1,          # an input the pixel needs is nodata or off its footprint
    "out_of_range": 2,           # an input value outside its physical range (set to NaN)
    "modelled_shortwave": 4,     # shortwave_down modelled as clear sky (no shortwave grid given)
    "cloud_corrected": 8,        # Crawford-Duchon cloud fraction 1 - Rs/Rso >= 0.1 (sky emissivity raised)
    "emissivity_default": 16,    # land-cover class missing from the table, `unknown` value used
    "sun_down": 32,              # sun below the horizon at the scene time
    "low_sun": 64,               # sun above the horizon but below 10 deg: no cloud correction from Rs/Rso
    "snow": 128,                 # snow on the ground (snow_cover > 0, or NDSI >= 0.4): snow emissivity blended in
}
DAY_QUALITY_BITS: dict[str, int] = {
    "input_missing": 1,
    "out_of_range": 2,
    "albedo_default": 4,         # no albedo for the day (or no scene within max_gap): FAO-56's 0.23 used
    "albedo_interpolated": 8,    # albedo interpolated in time between the scenes before and after
    "albedo_held": 16,           # albedo of the one scene within max_gap on one side only
    "snow_on_ground": 32,        # snow_cover > 0 or NDSI >= 0.4: flagged only (FAO-56 eq. 39 has no emissivity)
    "shortwave_capped": 64,      # Rs/Rso above 1, held at 1 in the longwave term (FAO-56 eq. 39)
    "overcast_held": 128,        # Rs/Rso below 0.3, held at 0.3 (ASCE-EWRI 2005 limits)
}


@dataclass(frozen=True)
class Product:
    name: str
    long_name: str
    units: str                 # as written in tags / NetCDF (udunits-parsable)
    standard_name: str | None  # CF standard name, or None where the table has none
    dtype: str = "float32"
    diverging: bool = False    # quicklook colour map centred on zero
    positive: str = ""         # sign convention in words
    flags: dict[str, int] | None = None   # bit meanings of a flag product (uint8)

    @property
    def is_flags(self) -> bool:
        """Bit flags (uint8): overviews by nearest pixel, a declared nodata, a legend, no statistics."""
        return self.flags is not None

    @property
    def nodata(self) -> float:
        return QUALITY_NODATA if self.is_flags else float("nan")


_W = "W m-2"
_MJ = "MJ m-2 day-1"

# Scene (instantaneous) products [W m-2 unless stated].  Sign convention of the
# project: positive = energy gained by the surface, except net_longwave, which
# keeps the FAO-56 sense (positive = net loss) and so maps to CF's "upward" name.
SCENE_PRODUCTS: dict[str, Product] = {p.name: p for p in [
    Product("net_radiation", "surface net radiation", _W, "surface_net_downward_radiative_flux",
            diverging=True, positive="downward (gain by the surface)"),
    Product("net_shortwave", "surface net shortwave radiation", _W, "surface_net_downward_shortwave_flux",
            positive="downward (absorbed)"),
    Product("net_longwave", "surface net longwave loss", _W, "surface_net_upward_longwave_flux",
            diverging=True, positive="upward (loss by the surface)"),
    Product("longwave_down", "downwelling longwave at the surface", _W, "surface_downwelling_longwave_flux_in_air"),
    Product("longwave_up", "longwave leaving the surface (emitted + reflected)", _W,
            "surface_upwelling_longwave_flux_in_air"),
    Product("surface_emissivity", "broadband surface emissivity", "1", "surface_longwave_emissivity"),
    Product("sky_emissivity", "effective atmospheric emissivity", "1", None),
    # on the sloped pixel (methods.terrain); CF names a horizontal flux only, so no standard name
    Product("incident_shortwave", "shortwave incident on the surface (after terrain)", _W, None),
    Product("quality", "quality bit flags", "1", None, dtype="uint8", flags=SCENE_QUALITY_BITS),
]}

# Day products [MJ m-2 day-1].  CF treats MJ m-2 day-1 as a flux convertible to W m-2.
DAY_PRODUCTS: dict[str, Product] = {p.name: p for p in [
    Product("net_radiation", "daily surface net radiation", _MJ, "surface_net_downward_radiative_flux",
            diverging=True, positive="downward (gain by the surface)"),
    Product("net_shortwave", "daily surface net shortwave radiation", _MJ, "surface_net_downward_shortwave_flux",
            positive="downward (absorbed)"),
    Product("net_longwave", "daily surface net longwave loss", _MJ, "surface_net_upward_longwave_flux",
            diverging=True, positive="upward (loss by the surface)"),
    Product("clear_sky_shortwave", "daily clear-sky shortwave (FAO-56 Rso)", _MJ,
            "surface_downwelling_shortwave_flux_in_air_assuming_clear_sky"),
    Product("incident_shortwave", "daily shortwave incident on the surface (after terrain)", _MJ, None),
    Product("quality", "quality bit flags", "1", None, dtype="uint8", flags=DAY_QUALITY_BITS),
]}

DEFAULT_PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave", "quality")

#: a scene's daily net radiation (methods.scene_to_day): its own name, so it never collides with the
#: FAO-56 day of the same date; written as days/net_radiation_from_scene_{YYYYMMDDTHHMM}.tif
SCENE_DAY_PRODUCT = "net_radiation_from_scene"
ALL_PRODUCT_NAMES = tuple(dict.fromkeys(list(SCENE_PRODUCTS) + list(DAY_PRODUCTS)))

#: the static terrain layers (methods.terrain), once per grid and DEM under DIR/terrain/; horizon angles
#: are one file per azimuth, DIR/terrain/horizons/horizon_{AAA}.tif (AAA degrees clockwise from north)
TERRAIN_PRODUCTS: dict[str, Product] = {p.name: p for p in [
    Product("slope", "slope of the ground", "degree", None),
    Product("aspect", "aspect: downslope direction, clockwise from north (NaN where flat)", "degree", None),
    Product("sky_view_factor", "sky-view factor", "1", None),
    Product("horizon", "horizon elevation angle", "degree", None),
]}


def terrain_product(name: str) -> Product:
    """The :class:`Product` of a static terrain layer (``horizon_AAA`` -> ``horizon``)."""
    return TERRAIN_PRODUCTS["horizon" if name.startswith("horizon_") else name]


#: per-pixel statistics a composite may ask for (see outputs/composites.py)
COMPOSITE_STATISTICS = ("mean", "median", "min", "max", "sum", "std", "count", "total")

def quality_bits(kind: TimeKind) -> dict[str, int]:
    """The quality bit table of products of ``kind``."""
    return SCENE_QUALITY_BITS if TimeKind(kind) is TimeKind.SCENES else DAY_QUALITY_BITS


def product_info(name: str, kind: TimeKind) -> Product:
    """The :class:`Product` of ``name`` for ``kind``."""
    table = SCENE_PRODUCTS if TimeKind(kind) is TimeKind.SCENES else DAY_PRODUCTS
    try:
        return table[name]
    except KeyError:
        raise KeyError(f"unknown {kind} product {name!r}; valid: {', '.join(table)}") from None
