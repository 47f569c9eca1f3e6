"""A product's identity and provenance: what it depends on (the settings hash) and its tags.

One tag builder serves every product kind (scenes, days, scene-derived days,
composites), so every GeoTIFF states its quantity, units, method, time,
inputs, software version and settings hash the same way.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os

from .._version import __version__
from ..config import CompositeSpec, Config
from ..io.paths import is_remote
from ..io.rasters import LayerSource
from ..io.remote import remote_fingerprint
from ..kinds import TimeKind
from ..model.products import SCENE_DAY_PRODUCT, Product, product_info, terrain_product

__all__ = ["file_fingerprint", "sources_fingerprint", "settings_hash", "product_tags", "job_product_tags",
           "composite_tags", "terrain_tags"]


def file_fingerprint(path: str, *, fresh: bool = False) -> list:
    """What changes whenever the content of input ``path`` changes (README: reruns and fingerprints).

    Local files: size, modification and change times (ns), inode and device,
    so a rewrite that keeps size and mtime (``touch -r``, ``cp -p``,
    ``rsync -t``) still changes the change time or the inode.  Remote inputs:
    the ETag, else the Last-Modified, of a HEAD request (see
    :func:`radledger.io.remote.remote_fingerprint`; ``fresh`` asks again even
    within a fingerprint session).  A missing file gives just its path.
    """
    if is_remote(path):
        return [path, *remote_fingerprint(path, fresh=fresh)]
    try:
        st = os.stat(path)
    except (OSError, ValueError):
        return [path]
    return [path, st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino, st.st_dev]


def source_fingerprint(src, *, fresh: bool = False) -> list:
    """What a product depends on in one source: its file(s), the steps read, the decoding.

    A source made by this run itself (a weather grid from stations) says what it depends on
    through its ``identity()``.
    """
    own = getattr(src, "identity", None)
    if callable(own):
        return own()
    parts = getattr(src, "parts", None)
    if parts is not None:     # a layer derived from others (a scene's air temperature from Tmax/Tmin)
        return [*src.settings] + [[name, source_fingerprint(s, fresh=fresh)] for name, s in parts]
    scenes = getattr(src, "scenes", None)
    if scenes is not None:    # a day's albedo between scenes: each scene's albedo, and the day
        return ["albedo between scenes", str(src.day), src.max_gap] + [[str(t), source_fingerprint(s, fresh=fresh)]
                                                                       for t, s in scenes]
    parts = file_fingerprint(src.path, fresh=fresh) + [src.scale, src.offset, src.nodata, src.factor, src.shift,
                                                       src.resampling]
    if getattr(src, "variable", None) is not None:   # a time stack: which steps, how weighted
        parts += [src.variable, list(src.steps), list(src.weights)]
    return parts


def sources_fingerprint(srcs: dict[str, LayerSource], *, fresh: bool = False) -> list:
    """What a product depends on in its inputs: each source's files, steps and decoding."""
    return [source_fingerprint(s, fresh=fresh) for s in srcs.values()]


def settings_hash(*parts) -> str:
    text = json.dumps(parts, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:20]


def product_tags(product: Product, *, quantity: str | None = None, method: str, time: str, time_kind: str,
                 inputs: str, title: str, settings_hash: str, long_name: str | None = None,
                 units: str | None = None, standard_name: str | None = None,
                 extra: dict | None = None) -> dict[str, str]:
    """The tags every radledger GeoTIFF carries (``radledger info`` prints them)."""
    tags = {
        "quantity": quantity or product.name,
        "long_name": long_name if long_name is not None else product.long_name,
        "units": units if units is not None else product.units,
        "standard_name": standard_name if standard_name is not None else (product.standard_name or ""),
        "positive": product.positive, "method": method, "time": time, "time_kind": time_kind,
        "title": title, "inputs": inputs, "software": f"radledger {__version__}",
        "settings_hash": settings_hash,
        "created": dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
    }
    if product.is_flags:
        tags["flag_masks"] = " ".join(str(v) for v in product.flags.values())
        tags["flag_meanings"] = " ".join(product.flags)
    if extra:
        tags.update(extra)
    return tags


def _scene_method(cfg: Config) -> str:
    m = cfg.methods
    return (f"Rn = (1 - albedo) Rs - eps_s (sigma Ts^4 - Rld); Rld = eps_sky sigma Ta^4; "
            f"sky emissivity {m.sky_emissivity}; clouds {m.clouds}; clear-sky shortwave "
            f"{m.clear_sky_shortwave}; sigma 5.670374419e-8 (CODATA 2018)" + _terrain_method(cfg, scenes=True))


DAY_METHOD = "FAO-56 (Allen et al. 1998) eqs 21, 37, 38, 39, 40; 24-hour total"

_TERRAIN_TEXT = {
    "slope": "slope and aspect Horn (1981); sky-view factor (1 + cos slope) / 2",
    "shading": "slope and aspect Horn (1981); cast shadows and sky-view factor from 36 horizon angles "
               "(Dozier & Frew 1990)",
}


def _terrain_method(cfg: Config, *, scenes: bool) -> str:
    """What methods.terrain adds to a product's method tag ("" for level ground)."""
    t = cfg.methods.terrain
    if t == "none":
        return ""
    if scenes:
        return (f"; terrain {t}: Rs on the slope = beam cos(incidence) (NREL SPA sun) + diffuse V + albedo Rs "
                f"(1 - V), beam/diffuse by {cfg.methods.diffuse_fraction} (Erbs, Klein & Duffie 1982); "
                f"Rld = V Rld_sky + (1 - V) eps_s sigma Ts^4 (Pluess & Ohmura 1997, terrain at the pixel's "
                f"own Ts); {_TERRAIN_TEXT[t]}")
    return (f"; terrain {t}: Rs on the slope = Rs x daily clear-sky ratio slope/flat (ASCE-EWRI 2005 "
            f"App. D, 5-minute steps); Rs/Rso of eq. 39 on flat ground; {_TERRAIN_TEXT[t]}")


def terrain_tags(cfg: Config, name: str, *, settings_hash: str, dem: str, halo: int, relief: float
                 ) -> dict[str, str]:
    """Tags of a static terrain layer (``slope``, ``aspect``, ``sky_view_factor``, ``horizon_AAA``)."""
    method = {"slope": "Horn (1981) weighted 3 x 3 differences",
              "aspect": "Horn (1981) weighted 3 x 3 differences; downslope direction, clockwise from north",
              "sky_view_factor": "Dozier & Frew (1990) from 36 horizon angles and the pixel's slope"
              if cfg.methods.terrain == "shading" else "(1 + cos slope) / 2 of a plane (Liu & Jordan 1963)"}
    extra = {"halo_pixels": str(halo), "relief_m": f"{relief:.1f}"}
    long_name = None
    if name.startswith("horizon_"):
        azimuth = int(name.split("_")[1])
        method[name] = (f"largest elevation angle of the DEM along a ray toward {azimuth} deg (Dozier & Frew "
                        f"1990), up to {halo} pixels away")
        long_name = f"horizon elevation angle toward azimuth {azimuth} deg (clockwise from north)"
        extra["azimuth"] = str(azimuth)
    return product_tags(terrain_product(name), quantity=name, long_name=long_name, method=method[name], time="",
                        time_kind="terrain", inputs=f"elevation={dem}", title=cfg.title,
                        settings_hash=settings_hash, extra=extra)


def _input_texts(sources: dict) -> list[str]:
    """``layer=path`` of each input; a derived layer says how, then its own inputs."""
    out = []
    for k, s in sorted(sources.items()):
        parts = getattr(s, "parts", None)
        if parts is None:
            out.append(f"{k}={s.path}")
        else:
            out += [s.method] + [f"{n}={p.path}" for n, p in parts]
    return out


def job_product_tags(cfg: Config, job, name: str) -> dict[str, str]:
    """Tags of product ``name`` of a scene or day job (``net_radiation_from_scene``: a scene's day product)."""
    inputs = "; ".join(_input_texts(job.sources))
    common = dict(title=cfg.title, inputs=inputs, settings_hash=job.settings_hash)
    derived = "".join(f"; {s.describe()}" for s in job.sources.values() if getattr(s, "parts", None) is not None)
    if name == SCENE_DAY_PRODUCT:
        total = "daytime total" if cfg.methods.scene_to_day == "sinusoidal" else "24-hour total"
        return product_tags(product_info("net_radiation", TimeKind.DAYS), quantity=name,
                            method=f"scene to day: {cfg.methods.scene_to_day} ({total}) from the "
                                   f"{job.when.strftime('%Y-%m-%dT%H:%MZ')} scene" + derived,
                            time=job.when.date().isoformat(), time_kind=str(TimeKind.DAYS),
                            extra={"daily_total": total}, **common)
    product = product_info(name, job.kind)
    if job.kind is TimeKind.SCENES:
        extra = {"notes": " | ".join(job.notes)} if job.notes else None
        return product_tags(product, method=_scene_method(cfg) + derived,
                            time=job.when.strftime("%Y-%m-%dT%H:%M:%SZ"),
                            time_kind=str(job.kind), extra=extra, **common)
    extra = {"notes": " | ".join(job.notes)} if job.notes else None
    return product_tags(product, method=DAY_METHOD + _terrain_method(cfg, scenes=False), time=job.when.isoformat(),
                        time_kind=str(job.kind), extra=extra, **common)


def composite_tags(cfg: Config, comp: CompositeSpec, statistic: str, members: list, settings_hash: str
                   ) -> dict[str, str]:
    """Tags of one statistic file of a composite over ``members`` (their paths)."""
    base = product_info("net_radiation", comp.source)
    one_signed = statistic in ("count", "total")
    return product_tags(
        base, quantity=f"net_radiation {statistic}",
        units={"count": "1", "total": "MJ m-2"}.get(statistic, base.units),
        standard_name="" if one_signed else None,
        long_name=f"{statistic} of {base.long_name} over {comp.start}..{comp.end}",
        method=f"per-pixel {statistic} over valid dates; min_count {comp.min_count}"
               + ("; total = mean x days in window" if statistic == "total" else ""),
        time=f"{comp.start.isoformat()}/{comp.end.isoformat()}", time_kind="composites",
        inputs="; ".join(str(p) for p in members), title=cfg.title, settings_hash=settings_hash,
        extra={"statistic": statistic, "window_days": str(comp.window_days), "members": str(len(members)),
               **({"positive": ""} if statistic in ("count", "std") else {})})
