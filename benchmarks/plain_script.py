"""The baseline: surface net radiation the way one writes it by hand.

Reads all six layers whole into NumPy with rasterio (GDAL default settings),
looks emissivity up per land-cover class, evaluates

    Rn = (1 - a) Rs - eps sigma Ts^4 + eps eps_sky sigma Ta^4
    eps_sky = 1.24 (10 ea / Ta)^(1/7)        (Brutsaert 1975, e in hPa)

and writes a COG with rasterio's COG driver.  Used by bench_scene.py, which
runs it as a separate process under /usr/bin/time -v.

    python benchmarks/plain_script.py SCENE_DIR OUT.tif
    python benchmarks/plain_script.py --all-products SCENE_DIR OUT_DIR

With --all-products it writes four COGs into OUT_DIR, from the same formulas:

    net_shortwave.tif   Rns = (1 - a) Rs
    net_longwave.tif    Rnl = eps sigma Ts^4 - eps eps_sky sigma Ta^4   (positive = loss)
    net_radiation.tif   Rn  = Rns - Rnl
    quality.tif         uint8, bit 1 where any input is NaN or its declared nodata
                        (the three maps are NaN there); nodata 255

The script checks no physical ranges, so bit 1 is the only flag it sets.
"""

import argparse
import csv
import os

import numpy as np
import rasterio

SIGMA = 5.670374419e-8
MISSING = 1            # quality bit: an input is nodata / NaN
QUALITY_NODATA = 255


def read(path):
    with rasterio.open(path) as src:
        return src.read(1), src.profile


def cog_profile(profile, dtype="float32", nodata=None, resampling="AVERAGE"):
    profile = dict(profile)
    profile.update(driver="COG", dtype=dtype, count=1, nodata=nodata,
                   compress="ZSTD", predictor="YES", blocksize=512,
                   overviews="AUTO", overview_resampling=resampling, num_threads="ALL_CPUS")
    for key in ("tiled", "blockxsize", "blockysize", "interleave"):
        profile.pop(key, None)
    return profile


def write(path, array, profile):
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(array, 1)


def missing_mask(array, profile):
    """True where the layer has no value: NaN (floats) or its declared nodata."""
    bad = np.isnan(array) if array.dtype.kind == "f" else np.zeros(array.shape, dtype=bool)
    nodata = profile.get("nodata")
    if nodata is not None and not np.isnan(nodata):
        bad |= array == nodata
    return bad


def main(scene_dir, out_path, all_products=False):
    albedo, p_albedo = read(f"{scene_dir}/albedo.tif")
    ts, p_ts = read(f"{scene_dir}/lst.tif")
    ta, p_ta = read(f"{scene_dir}/ta.tif")
    ea, p_ea = read(f"{scene_dir}/ea.tif")
    rs, p_rs = read(f"{scene_dir}/rs.tif")
    lc, profile = read(f"{scene_dir}/land_cover.tif")

    lut = np.full(256, np.nan, dtype=np.float32)
    with open(f"{scene_dir}/emissivity.csv") as f:
        for row in csv.DictReader(f):
            lut[int(row["class"])] = float(row["emissivity"])
    eps = lut[lc]

    eps_sky = 1.24 * (10 * ea / ta) ** (1 / 7)

    if not all_products:
        rn = (1 - albedo) * rs - eps * SIGMA * ts**4 + eps * eps_sky * SIGMA * ta**4
        write(out_path, rn.astype(np.float32), cog_profile(profile))
        return

    rns = (1 - albedo) * rs
    rnl = eps * SIGMA * ts**4 - eps * eps_sky * SIGMA * ta**4
    rn = rns - rnl

    missing = missing_mask(lc, profile)
    for array, prof in ((albedo, p_albedo), (ts, p_ts), (ta, p_ta), (ea, p_ea), (rs, p_rs)):
        missing |= missing_mask(array, prof)
    quality = np.zeros(lc.shape, dtype=np.uint8)
    quality[missing] |= MISSING
    for array in (rns, rnl, rn):
        array[missing] = np.nan

    os.makedirs(out_path, exist_ok=True)
    float_profile = cog_profile(profile, nodata=np.nan)      # NaN where an input is missing
    write(f"{out_path}/net_radiation.tif", rn.astype(np.float32), float_profile)
    write(f"{out_path}/net_shortwave.tif", rns.astype(np.float32), float_profile)
    write(f"{out_path}/net_longwave.tif", rnl.astype(np.float32), float_profile)
    # flags: averaging bits in the overviews would make new, meaningless values
    write(f"{out_path}/quality.tif", quality,
          cog_profile(profile, dtype="uint8", nodata=QUALITY_NODATA, resampling="NEAREST"))


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description="net radiation by hand (benchmark baseline)")
    ap.add_argument("--all-products", action="store_true",
                    help="write net_radiation, net_shortwave, net_longwave and quality into OUT (a directory)")
    ap.add_argument("scene_dir")
    ap.add_argument("out", help="OUT.tif, or with --all-products a directory")
    args = ap.parse_args()
    main(args.scene_dir, args.out, args.all_products)
