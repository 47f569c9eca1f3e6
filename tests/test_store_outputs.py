"""Outputs on an S3-compatible object store: a real S3 server (moto's server mode) on loopback,
reached through GDAL's /vsis3/ exactly as a user's store would be; never a mock of a client."""

from __future__ import annotations

import shutil
import urllib.request

import numpy as np
import pytest
import rasterio

from radledger.cli import main
from radledger.config import load_config
from radledger.io.objectstore import list_objects
from radledger.runner import run_config
from scenario import make_scenario, read

moto_server = pytest.importorskip("moto.server")


@pytest.fixture(scope="module")
def store():
    server = moto_server.ThreadedMotoServer(ip_address="127.0.0.1", port=0, verbose=False)
    server.start()
    host, port = server.get_host_and_port()
    yield f"{host}:{port}"
    server.stop()


@pytest.fixture
def bucket(store, monkeypatch, request):
    """A new bucket on the loopback server, and GDAL pointed at the server (plain HTTP, path style)."""
    for k, v in {"AWS_S3_ENDPOINT": store, "AWS_HTTPS": "NO", "AWS_VIRTUAL_HOSTING": "FALSE",
                 "AWS_ACCESS_KEY_ID": "radledger-test", "AWS_SECRET_ACCESS_KEY": "radledger-test",
                 "AWS_REGION": "us-east-1", "AWS_NO_SIGN_REQUEST": "NO"}.items():
        monkeypatch.setenv(k, v)
    name = request.node.name.replace("_", "-").replace("[", "-").replace("]", "").lower()[:50]
    urllib.request.urlopen(urllib.request.Request(f"http://{store}/{name}", method="PUT")).close()
    return name


def _products(folder):
    return sorted(p.relative_to(folder).as_posix() for p in folder.rglob("*.tif"))


def test_a_run_on_s3_writes_the_same_cogs_as_a_local_run_and_a_rerun_elsewhere_keeps_them(tmp_path, bucket):
    local = make_scenario(tmp_path / "local", shape=(64, 80), chunk=32)
    run_config(load_config(local.config))
    expected = _products(local.folder / "out")

    remote = make_scenario(tmp_path / "remote", shape=(64, 80), chunk=32)
    remote.write_config(**{"output.directory": f"s3://{bucket}/season"})
    report = run_config(load_config(remote.config))
    assert len(report.written) == len(expected) == 4
    objects = list_objects(f"/vsis3/{bucket}/season")
    assert [o for o in objects if o.endswith(".tif")] == expected
    assert not [o for o in objects if "partial" in o or o.endswith(".lock")]
    for rel in expected:
        with rasterio.open(f"/vsis3/{bucket}/season/{rel}") as src:
            # GDAL's own reading of the layout: a cloud-optimised GeoTIFF, tiled, with overviews
            assert src.tags(ns="IMAGE_STRUCTURE").get("LAYOUT") == "COG", rel
            assert src.profile["tiled"]
            got = src.read(1)
            tags = src.tags()
        np.testing.assert_array_equal(got, read(local.folder / "out" / rel))
        with rasterio.open(local.folder / "out" / rel) as ref:
            assert tags["settings_hash"] != "" and tags["units"] == ref.tags()["units"]

    # an unchanged rerun uploads nothing; with the staging folder gone (another machine), the rerun
    # copies the objects down, keeps every product by its tags and uploads nothing
    report = run_config(load_config(remote.config))
    assert report.written == []
    shutil.rmtree(remote.folder / ".radledger-staging")
    report = run_config(load_config(remote.config))
    assert report.written == [] and len(report.skipped) == 4
    assert list_objects(f"/vsis3/{bucket}/season") == objects


def test_a_changed_product_is_uploaded_again_and_only_it(tmp_path, bucket, capsys):
    scn = make_scenario(tmp_path, shape=(64, 80), chunk=32)
    scn.write_config(**{"output.directory": f"/vsis3/{bucket}/run", "output.products": ["net_radiation"]})
    assert main(["run", str(scn.config)]) == 0
    assert "uploaded to s3://" in capsys.readouterr().out
    staged = tmp_path / ".radledger-staging" / bucket / "run" / "scenes" / "net_radiation_20260714T1810.tif"
    before = read(staged)
    scn.write_config(**{"methods.sky_emissivity": "prata"})
    assert main(["run", "--quiet", str(scn.config)]) == 0
    with rasterio.open(f"/vsis3/{bucket}/run/scenes/net_radiation_20260714T1810.tif") as src:
        after = src.read(1)
    np.testing.assert_array_equal(after, read(staged))
    assert not np.array_equal(np.nan_to_num(after), np.nan_to_num(before))


@pytest.mark.parametrize("directory,staging,words", [
    ("s3://", None, "name a bucket"),
    ("gs://bucket/run", None, "not a local folder or an s3:// prefix"),
    ("out", "stage", "output.staging: only for an s3:// output.directory"),
    ("s3://bucket/run", "s3://other/stage", "output.staging: must be a local folder path"),
])
def test_output_store_mistakes_are_config_errors(tmp_path, capsys, directory, staging, words):
    scn = make_scenario(tmp_path, shape=(32, 32), chunk=32)
    scn.write_config(**{"output.directory": directory, **({"output.staging": staging} if staging else {})})
    assert main(["check", str(scn.config)]) == 2
    err = capsys.readouterr().err
    assert words in err and "Traceback" not in err


def test_inputs_on_the_store_give_the_local_products_and_a_changed_object_is_recomputed(tmp_path, bucket, store):
    scn = make_scenario(tmp_path, shape=(64, 80), chunk=32)
    run_config(load_config(scn.config))
    local = read(tmp_path / "out" / "scenes" / "net_radiation_20260714T1810.tif")

    boto3 = pytest.importorskip("boto3")       # an S3 client apart from GDAL puts the inputs there
    client = boto3.client("s3", endpoint_url=f"http://{store}", region_name="us-east-1",
                          aws_access_key_id="radledger-test", aws_secret_access_key="radledger-test")

    def put(path, key):
        client.put_object(Bucket=bucket, Key=key, Body=path.read_bytes())

    put(tmp_path / "albedo.tif", "in/albedo.tif")
    scn.write_config(**{"scenes.0.albedo": f"s3://{bucket}/in/albedo.tif", "output.directory": "out-s3"})
    run_config(load_config(scn.config))
    got = tmp_path / "out-s3" / "scenes" / "net_radiation_20260714T1810.tif"
    np.testing.assert_array_equal(read(got), local)
    assert run_config(load_config(scn.config)).written == []          # same object (ETag): kept
    with rasterio.open(tmp_path / "albedo.tif") as src:                # other pixels at the same key
        profile, values = src.profile, src.read(1)
    with rasterio.open(tmp_path / "albedo2.tif", "w", **profile) as dst:
        dst.write(np.where(values == -9999, values, values + 20), 1)
    put(tmp_path / "albedo2.tif", "in/albedo.tif")
    report = run_config(load_config(scn.config))
    assert got in report.written and not np.array_equal(np.nan_to_num(read(got)), np.nan_to_num(local))


def test_out_on_the_command_line_may_name_an_s3_prefix(tmp_path, bucket, capsys, monkeypatch):
    scn = make_scenario(tmp_path, shape=(32, 32), chunk=32)
    scn.write_config(**{"output.products": ["net_radiation"]})
    monkeypatch.chdir(tmp_path)
    assert main(["run", "--quiet", "--out", f"s3://{bucket}/chosen", str(scn.config)]) == 0, capsys.readouterr().err
    assert list_objects(f"/vsis3/{bucket}/chosen") == ["scenes/net_radiation_20260714T1810.tif"]
    assert not (tmp_path / "s3:").exists()



def test_a_bucket_that_cannot_be_reached_is_one_line_and_a_rerun_after_creating_it_only_uploads(
        tmp_path, bucket, store, capsys):
    scn = make_scenario(tmp_path, shape=(32, 32), chunk=32)
    scn.write_config(**{"output.directory": f"s3://{bucket}-later/run", "output.products": ["net_radiation"]})
    assert main(["run", "--quiet", str(scn.config)]) == 2
    err = capsys.readouterr().err
    assert "cannot copy" in err and f"{bucket}-later" in err and "credentials" in err and "Traceback" not in err
    urllib.request.urlopen(urllib.request.Request(f"http://{store}/{bucket}-later", method="PUT")).close()
    report = run_config(load_config(scn.config))
    assert report.written == []                           # computed before; now only uploaded
    assert list_objects(f"/vsis3/{bucket}-later/run") == ["scenes/net_radiation_20260714T1810.tif"]
