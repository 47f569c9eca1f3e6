"""The top-level Python API: radledger.net_radiation and radledger.daily_net_radiation."""

from __future__ import annotations

import math

import dask.array as da
import numpy as np
import pytest

import radledger
from radledger import physics as p

scipy_constants = pytest.importorskip("scipy.constants")
# CODATA, exact in the 2019 SI [W m-2 K-4]; radledger holds it to the 10
# digits CODATA prints (5.670374419e-8), hence rel=1e-9 below.
SIGMA = scipy_constants.Stefan_Boltzmann


def brutsaert_hpa(t_k, e_hpa):
    """Brutsaert (1975) eq. 11, as published: e in hPa, T in K."""
    return 1.24 * (e_hpa / t_k) ** (1.0 / 7.0)


def test_exports():
    assert radledger.__version__
    assert callable(radledger.net_radiation) and callable(radledger.daily_net_radiation)
    assert {"net_radiation", "daily_net_radiation"} <= set(radledger.__all__)


def test_net_radiation_is_the_published_balance():
    # Rn = (1 - a) Rs - eps_s (sigma Ts^4 - eps_sky sigma Ta^4) (FAO-56 eqs. 38
    # and 40 with a grey surface reflecting 1 - eps_s of the sky's longwave),
    # eps_sky from Brutsaert (1975) with e in hPa (1.9 kPa = 19 hPa), sigma
    # from scipy.constants: every constant from its published source.
    a, rs, ts, ta, eps_s = 0.18, 750.0, 312.0, 303.0, 0.97
    e_kpa, e_hpa = 1.9, 19.0
    expected = (1 - a) * rs - eps_s * (SIGMA * ts**4 - brutsaert_hpa(ta, e_hpa) * SIGMA * ta**4)
    assert radledger.net_radiation(a, rs, ts, ta, e_kpa, eps_s) == pytest.approx(expected, rel=1e-9)


def test_brutsaert_uses_the_unrounded_coefficient():
    # 1.24 x 10^(1/7) = 1.7230..., not 1.72 (Brutsaert 1975 uses hPa).
    coefficient = p.brutsaert_1975(1.0, 0.1)  # (e/T) = 0.1 kPa / 1 K -> 1.24 (1)^(1/7)
    assert coefficient == pytest.approx(1.24, rel=1e-12)
    assert p.brutsaert_1975(300.0, 300.0) == pytest.approx(1.24 * 10 ** (1 / 7), rel=1e-12)
    assert 1.24 * 10 ** (1 / 7) == pytest.approx(1.7230, abs=5e-5)


@pytest.mark.parametrize("model", p.SKY_EMISSIVITY_MODELS)
def test_every_sky_model_is_selectable(model):
    rn = radledger.net_radiation(0.2, 600.0, 305.0, 298.0, 1.5, 0.98, sky_emissivity=model)
    eps_sky = p.sky_emissivity(298.0, 1.5, model)
    expected = 0.8 * 600.0 - 0.98 * (SIGMA * 305.0**4 - eps_sky * SIGMA * 298.0**4)
    assert rn == pytest.approx(expected, rel=1e-9)


def test_clear_summer_noon_and_night_are_plausible():
    # Clear mid-latitude summer noon over well-watered vegetation peaks near
    # 600-800 W m-2; night is negative, typically -30 to -100 W m-2 (common
    # practice).  Inputs are illustrative.
    noon = radledger.net_radiation(0.23, 950.0, 300.0, 298.0, 1.5, 0.98)
    night = radledger.net_radiation(0.23, 0.0, 288.0, 290.0, 1.2, 0.98)
    assert 600.0 <= noon <= 800.0
    assert -100.0 <= night <= -30.0


def test_crawford_duchon_clouds_raise_net_radiation_at_equal_shortwave():
    clear = radledger.net_radiation(0.2, 400.0, 295.0, 293.0, 1.2, 0.98)
    cloudy = radledger.net_radiation(
        0.2, 400.0, 295.0, 293.0, 1.2, 0.98, clouds="crawford-duchon", clear_sky_shortwave=800.0
    )
    # c = 1 - 400/800 = 0.5; eps = 0.5 + 0.5 eps_clear (Crawford & Duchon 1999 eq. 20).
    eps_clear = brutsaert_hpa(293.0, 12.0)  # 1.2 kPa = 12 hPa
    eps = 0.5 + 0.5 * eps_clear
    expected = 0.8 * 400.0 - 0.98 * (SIGMA * 295.0**4 - eps * SIGMA * 293.0**4)
    assert cloudy == pytest.approx(expected, rel=1e-9)
    assert cloudy > clear


def test_crawford_duchon_at_night_is_nan():
    rn = radledger.net_radiation(
        0.2, 0.0, 285.0, 287.0, 1.0, 0.98, clouds="crawford-duchon", clear_sky_shortwave=0.0
    )
    assert math.isnan(rn)


def test_unknown_sky_model_lists_valid_names():
    with pytest.raises(ValueError) as err:
        radledger.net_radiation(0.2, 500.0, 300.0, 295.0, 1.0, 0.97, sky_emissivity="brunt")
    message = str(err.value)
    assert "'brunt'" in message
    for name in p.SKY_EMISSIVITY_MODELS:
        assert name in message


def test_unknown_cloud_model_lists_valid_names():
    with pytest.raises(ValueError, match="none, crawford-duchon"):
        radledger.net_radiation(0.2, 500.0, 300.0, 295.0, 1.0, 0.97, clouds="cloudy")


def test_crawford_duchon_needs_clear_sky_shortwave():
    with pytest.raises(ValueError, match="clear_sky_shortwave"):
        radledger.net_radiation(0.2, 500.0, 300.0, 295.0, 1.0, 0.97, clouds="crawford-duchon")


def test_sky_emissivity_dispatcher_rejects_unknown_model():
    valid = "brutsaert, swinbank, idso-jackson, idso, satterlund, prata"
    with pytest.raises(ValueError, match=valid):
        p.sky_emissivity(290.0, 1.0, model="Brutsaert ")


def test_beam_diffuse_rejects_unknown_coefficients():
    with pytest.raises(ValueError, match="asce-ewri-2005"):
        p.clear_sky_shortwave_beam_diffuse(1000.0, 0.8, 101.3, 20.0, coefficients="asce")


def test_net_radiation_keeps_dask_lazy(no_compute):
    ts = da.from_array(np.linspace(290.0, 320.0, 16).reshape(4, 4), chunks=2)
    rn = radledger.net_radiation(0.2, 700.0, ts, 298.0, 1.4, 0.97)
    assert isinstance(rn, da.Array) and rn.chunks == ts.chunks


def test_daily_net_radiation_matches_components():
    kwargs = dict(latitude=-33.9, day_of_year=20, elevation=1200.0, albedo=0.18)
    rn = radledger.daily_net_radiation(28.0, 303.0, 288.0, 1.6, **kwargs)
    c = p.fao56_net_radiation_components_daily(28.0, 303.0, 288.0, 1.6, -33.9, 20, 1200.0, 0.18)
    assert rn == pytest.approx(c["net_radiation"], rel=1e-12)


def test_daily_net_radiation_is_keyword_only_for_place_and_day():
    with pytest.raises(TypeError):
        radledger.daily_net_radiation(20.0, 300.0, 285.0, 1.5, 45.0, 180)  # type: ignore[misc]
