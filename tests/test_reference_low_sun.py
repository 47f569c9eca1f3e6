"""Crawford & Duchon (1999) clouds under a low sun.

The cloud fraction ``c = 1 - R_s / R_so`` (Crawford & Duchon 1999, eq. 20)
must be zero under a clear sky.  With the clear-sky shortwave of ASCE-EWRI
(2005) Appendix D on the precise sun position as both R_s (a clear day) and
R_so it is, at 16 deg of sun elevation; at 4 deg the ratio is not trusted
and the 10 deg cut-off (common practice) keeps the clear-sky emissivity.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from radledger import physics as p

scipy_optimize = pytest.importorskip("scipy.optimize")

LAT, LON, Z = 45.0, 10.0, 200.0  # a site (fixture values)
DAY = dt.datetime(2026, 6, 21)  # midsummer morning, UTC
T_AIR, E_A = 290.0, 1.2  # screen-level air [K] and vapour pressure [kPa] (fixture values)


def _instant_of_elevation(elevation_deg):
    """The morning instant at which the SPA sun stands at ``elevation_deg``."""

    def height(seconds):
        zenith, _ = p.sun_position(LAT, LON, DAY + dt.timedelta(seconds=seconds))
        return 90.0 - zenith - elevation_deg

    seconds = scipy_optimize.brentq(height, 2 * 3600.0, 9 * 3600.0, xtol=1e-3)
    return DAY + dt.timedelta(seconds=seconds)


def _clear_sky(elevation_deg):
    t = _instant_of_elevation(elevation_deg)
    zenith, _ = p.sun_position(LAT, LON, t)
    assert 90.0 - zenith == pytest.approx(elevation_deg, abs=1e-4)
    ra = p.extraterrestrial_instant_precise(LAT, LON, t)  # W m-2
    pressure = p.atmospheric_pressure(Z)
    water = p.precipitable_water(E_A, pressure)
    rso_d = p.clear_sky_shortwave_beam_diffuse(ra, np.cos(np.radians(zenith)), pressure, water)
    return 90.0 - zenith, ra, rso_d


@pytest.mark.parametrize("elevation", [4.0, 16.0])
def test_a_clear_sky_adds_no_cloud(elevation):
    sun_elevation, _, rso = _clear_sky(elevation)
    eps_clear = p.brutsaert_1975(T_AIR, E_A)
    rs = rso  # a clear day: the measured shortwave is the clear-sky one
    eps = p.crawford_duchon_1999(eps_clear, rs, rso, sun_elevation=sun_elevation)
    assert eps == pytest.approx(eps_clear, rel=1e-12)
    assert bool(p.low_sun(sun_elevation)) == (elevation < 10.0)


def test_the_cut_off_keeps_a_cruder_clear_sky_from_inventing_cloud():
    # FAO-56 eq. 37 gives R_so = 0.754 R_a at any sun height; at 4 deg the
    # Appendix D clear sky transmits far less, so R_s / R_so < 1 on a clear
    # day and without the cut-off a spurious cloud fraction appears.
    sun_elevation, ra, rso_d = _clear_sky(4.0)
    rso_37 = p.clear_sky_shortwave_fao56(ra, Z)
    eps_clear = p.brutsaert_1975(T_AIR, E_A)
    assert rso_d < 0.6 * rso_37
    assert p.crawford_duchon_1999(eps_clear, rso_d, rso_37) > eps_clear + 0.05
    kept = p.crawford_duchon_1999(eps_clear, rso_d, rso_37, sun_elevation=sun_elevation)
    assert kept == eps_clear


def test_cut_off_also_covers_the_night_and_is_adjustable():
    eps_clear = 0.8
    # Night: without the sun elevation the fraction is unknown (NaN) ...
    assert np.isnan(p.crawford_duchon_1999(eps_clear, 0.0, 0.0))
    # ... with it the clear-sky emissivity is kept.
    assert p.crawford_duchon_1999(eps_clear, 0.0, 0.0, sun_elevation=-20.0) == eps_clear
    # Above the cut-off the published relation holds: c = 1 - 300/600 = 0.5,
    # eps = c + (1 - c) eps_clear (Crawford & Duchon 1999, eq. 20).
    eps = p.crawford_duchon_1999(eps_clear, 300.0, 600.0, sun_elevation=30.0)
    assert eps == pytest.approx(0.5 + 0.5 * eps_clear, rel=1e-12)
    # A stricter cut-off (ASCE-EWRI 2005 uses 0.3 rad, about 17 deg) skips it.
    strict = p.crawford_duchon_1999(eps_clear, 300.0, 600.0, sun_elevation=16.0,
                                    min_sun_elevation=np.degrees(0.3))
    assert strict == eps_clear
    mask = p.low_sun(np.array([-5.0, 9.99, 10.0, 45.0]))
    np.testing.assert_array_equal(mask, [True, True, False, False])
    assert p.CLEARNESS_MIN_SUN_ELEVATION == 10.0  # common practice
