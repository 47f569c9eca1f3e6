"""What each method and product needs: the one definition that the config check, the plan, the
kernels and the choice of the fused loop all derive from.

A scene needs albedo, surface and air temperature, one humidity layer and a
surface emissivity (land cover, or a constant).  Beyond that:

* clear-sky shortwave (the FAO-56 Annex 3 / ASCE-EWRI 2005 App. D model, or
  FAO-56 eq. 37) is needed when shortwave is not given (it is modelled), for
  the Crawford-Duchon cloud correction, and for the shortwave-ratio
  scene-to-day method; it needs the sun's position and the elevation (DEM);
* the sun's position alone is needed for the ``quality`` product (its
  ``sun_down`` / ``low_sun`` bits) and the sinusoidal scene-to-day method;
* everything else needs neither coordinates nor a DEM: a DEM given under
  ``static:`` is then not read at all.

A day (FAO-56) needs shortwave, Tmax, Tmin, one humidity layer and the
elevation (eq. 37); albedo is optional (0.23, flagged).

``methods.terrain`` (slope or shading) needs the DEM (the static terrain
layers are computed from it once, before any scene or day; their source
brings the sun over each scene's chunk).  The fused loop covers terrain
scenes too (model/terrain_fast.py).  A snow layer (``snow_cover``, else
``ndsi``) is read where given; scenes with snow take the NumPy kernel.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..kinds import TimeKind
from .layers import HUMIDITY_LAYERS, SNOW_LAYERS
from .products import SCENE_DAY_PRODUCT

__all__ = ["Needs", "scene_needs", "day_needs", "FUSED_PRODUCTS", "humidity_layer", "snow_layer",
           "terrain_reason"]

#: products the fused loop computes (model/fused.py)
FUSED_PRODUCTS = ("net_radiation", "net_shortwave", "net_longwave", "quality", "incident_shortwave")


@dataclass(frozen=True)
class Needs:
    """What one scene or day computes with."""
    kind: TimeKind
    layers: tuple[str, ...]      # the input layers the kernel reads, nothing more
    sun: bool                    # the sun's position per pixel (lon/lat of the grid)
    clear_sky: bool              # clear-sky shortwave (sun + elevation)
    fused: bool                  # the fused loop computes exactly what the NumPy kernel would
    why_elevation: str = ""      # for messages: what needs the DEM
    terrain: str = "none"        # methods.terrain: none | slope | shading (static layers from the DEM)

    @property
    def elevation(self) -> bool:
        """Whether the DEM is needed: read by the kernel, or the source of the static terrain layers."""
        return "elevation" in self.layers or self.terrain != "none"

    @property
    def snow(self) -> str | None:
        """The snow layer the kernel reads (``snow_cover`` or ``ndsi``), if any."""
        return snow_layer(self.layers)


def humidity_layer(given) -> str | None:
    """The humidity layer used when several are given: vapour pressure, then dew point, then RH."""
    return next((h for h in HUMIDITY_LAYERS if h in given), None)


def snow_layer(given) -> str | None:
    """The snow layer used when both are given: the snow-covered fraction, then NDSI."""
    return next((s for s in SNOW_LAYERS if s in given), None)


def terrain_reason(terrain: str) -> str:
    """Why ``methods.terrain`` needs the DEM ("" for none): the message's words."""
    return "" if terrain == "none" else f"methods.terrain: {terrain} (slope, aspect and sky view from the DEM)"


def scene_needs(given, *, products, sky_emissivity: str, clouds: str, scene_to_day: str = "none",
                emissivity_constant: bool = False, terrain: str = "none") -> Needs:
    """The needs of a scene given its available layers and the run's methods and products."""
    given = set(given)
    shortwave = "shortwave_down" in given
    humidity = humidity_layer(given)
    reasons = []
    if not shortwave:
        reasons.append("modelling clear-sky shortwave for a scene without shortwave_down")
    if clouds != "none":
        reasons.append(f"methods.clouds: {clouds} (clear-sky shortwave)")
    if scene_to_day == "shortwave-ratio":
        reasons.append("methods.scene_to_day: shortwave-ratio (clear-sky shortwave)")
    clear_sky = bool(reasons)
    if terrain_reason(terrain):
        reasons.append(terrain_reason(terrain))
    products = tuple(products) + ((SCENE_DAY_PRODUCT,) if scene_to_day != "none" else ())
    # (terrain: the static layers' source brings the sun over each chunk itself, model/terrain.py)
    sun = clear_sky or "quality" in products or scene_to_day != "none"
    layers = ["albedo", "surface_temperature", "air_temperature"]
    if humidity:
        layers.append(humidity)
    if humidity == "relative_humidity":
        pass   # RH converts with the air temperature, already read
    if shortwave:
        layers.append("shortwave_down")
    if not emissivity_constant:
        layers.append("land_cover")
    if clear_sky:
        layers.append("elevation")
    snow = snow_layer(given)
    if snow:
        layers.append(snow)
    fused = (sky_emissivity == "brutsaert" and clouds == "none" and shortwave and humidity == "vapour_pressure"
             and set(products) <= set(FUSED_PRODUCTS) and not snow)
    return Needs(TimeKind.SCENES, tuple(layers), sun=sun, clear_sky=clear_sky, fused=fused,
                 why_elevation="; ".join(reasons), terrain=terrain)


def day_needs(given, *, products, terrain: str = "none") -> Needs:
    """The needs of an FAO-56 day given its available layers."""
    given = set(given)
    layers = ["shortwave_down", "air_temperature_max", "air_temperature_min"]
    humidity = humidity_layer(given)
    if humidity:
        layers.append(humidity)
    if "albedo" in given:
        layers.append("albedo")
    layers.append("elevation")
    snow = snow_layer(given)
    if snow:
        layers.append(snow)
    return Needs(TimeKind.DAYS, tuple(layers), sun=False, clear_sky=True, fused=False,
                 why_elevation="FAO-56 daily maps (clear-sky shortwave, eq. 37)", terrain=terrain)
