"""The baseline: surface net radiation the way one writes it by hand.

Reads all six layers whole into NumPy with rasterio (GDAL default settings),
looks emissivity up per land-cover class, evaluates

    Rn = (1 - a) Rs - eps sigma Ts^4 + eps eps_sky sigma Ta^4
    eps_sky = 1.24 (10 ea / Ta)^(1/7)        (Brutsaert 1975, e in hPa)

and writes a COG with rasterio's COG driver.  Used by bench_scene.py, which
runs it as a separate process under /usr/bin/time -v.

    python benchmarks/plain_script.py SCENE_DIR OUT.tif
"""

import csv
import sys

import numpy as np
import rasterio

SIGMA = 5.670374419e-8


def read(path):
    with rasterio.open(path) as src:
        return src.read(1), src.profile


def main(scene_dir, out_path):
    albedo, _ = read(f"{scene_dir}/albedo.tif")
    ts, _ = read(f"{scene_dir}/lst.tif")
    ta, _ = read(f"{scene_dir}/ta.tif")
    ea, _ = read(f"{scene_dir}/ea.tif")
    rs, _ = read(f"{scene_dir}/rs.tif")
    lc, profile = read(f"{scene_dir}/land_cover.tif")

    lut = np.full(256, np.nan, dtype=np.float32)
    with open(f"{scene_dir}/emissivity.csv") as f:
        for row in csv.DictReader(f):
            lut[int(row["class"])] = float(row["emissivity"])
    eps = lut[lc]

    eps_sky = 1.24 * (10 * ea / ta) ** (1 / 7)
    rn = (1 - albedo) * rs - eps * SIGMA * ts**4 + eps * eps_sky * SIGMA * ta**4

    profile.update(driver="COG", dtype="float32", count=1, nodata=None,
                   compress="ZSTD", predictor="YES", blocksize=512,
                   overviews="AUTO", overview_resampling="AVERAGE", num_threads="ALL_CPUS")
    for key in ("tiled", "blockxsize", "blockysize", "interleave"):
        profile.pop(key, None)
    with rasterio.open(out_path, "w", **profile) as dst:
        dst.write(rn.astype(np.float32), 1)


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit("usage: python plain_script.py SCENE_DIR OUT.tif")
    main(sys.argv[1], sys.argv[2])
