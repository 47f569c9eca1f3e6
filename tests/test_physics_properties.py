"""Physical properties that must hold over the whole input range (hypothesis).

Ranges: air temperature 233-323 K, vapour pressure 0.01-5 kPa and never above
saturation (FAO-56 eq. 11), latitude -60..60 deg.  Bounds such as
"emissivity in (0, 1]" are physics, not published check values.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

import radledger
from radledger import physics as p

# No deadline: the suite has no timing limits.
relaxed = settings(deadline=None, max_examples=60)

finite = {"allow_nan": False, "allow_infinity": False}
air_temperature = st.floats(233.0, 323.0, **finite)
fraction = st.floats(0.0, 1.0, **finite)


@st.composite
def air_states(draw):
    """(T [K], e_a [kPa]) with 0.01 <= e_a <= min(5, e_sat(T))."""
    t = draw(air_temperature)
    e_max = min(5.0, float(p.saturation_vapour_pressure(t)))
    assume(e_max > 0.01)
    e = draw(st.floats(0.01, e_max, **finite))
    return t, e


@pytest.mark.parametrize("model", p.SKY_EMISSIVITY_MODELS)
@relaxed
@given(state=air_states())
def test_every_sky_model_is_an_emissivity(model, state):
    t, e = state
    eps = p.sky_emissivity(t, e, model)
    assert 0.0 < eps <= 1.0


@relaxed
@given(t1=st.floats(150.0, 400.0, **finite), dt=st.floats(0.01, 50.0, **finite),
       eps=st.floats(0.01, 1.0, **finite))
def test_emission_rises_with_temperature(t1, dt, eps):
    assert p.surface_emission(t1 + dt, eps) > p.surface_emission(t1, eps)


@relaxed
@given(
    a1=st.floats(0.0, 0.95, **finite),
    da=st.floats(0.01, 0.05, **finite),
    rs=st.floats(1.0, 1200.0, **finite),
    ts=st.floats(250.0, 340.0, **finite),
    state=air_states(),
    eps_s=st.floats(0.8, 1.0, **finite),
    model=st.sampled_from(p.SKY_EMISSIVITY_MODELS),
)
def test_net_radiation_falls_as_albedo_rises(a1, da, rs, ts, state, eps_s, model):
    ta, ea = state
    low = radledger.net_radiation(a1, rs, ts, ta, ea, eps_s, sky_emissivity=model)
    high = radledger.net_radiation(a1 + da, rs, ts, ta, ea, eps_s, sky_emissivity=model)
    assert high < low


@relaxed
@given(state=air_states(), rs=st.floats(0.0, 1200.0, **finite),
       rso=st.floats(1.0, 1200.0, **finite))
def test_crawford_duchon_between_clear_sky_and_one(state, rs, rso):
    t, e = state
    clear = p.brutsaert_1975(t, e)
    eps = p.crawford_duchon_1999(clear, rs, rso)
    assert clear - 1e-12 <= eps <= 1.0 + 1e-12


@relaxed
@given(state=air_states(), rs=st.floats(0.0, 1200.0, **finite),
       rso=st.floats(1.0, 1200.0, **finite), elevation=st.floats(-90.0, 90.0, **finite))
def test_crawford_duchon_cut_off_keeps_clear_sky_below_it(state, rs, rso, elevation):
    t, e = state
    clear = p.brutsaert_1975(t, e)
    with_cut = p.crawford_duchon_1999(clear, rs, rso, sun_elevation=elevation)
    if elevation < p.CLEARNESS_MIN_SUN_ELEVATION:
        assert with_cut == clear
    else:
        assert with_cut == p.crawford_duchon_1999(clear, rs, rso)


def test_crawford_duchon_is_nan_without_daylight():
    assert math.isnan(p.crawford_duchon_1999(0.8, 0.0, 0.0))


@relaxed
@given(t1=air_temperature, dt=st.floats(0.1, 20.0, **finite))
def test_saturation_vapour_pressure_rises_with_temperature(t1, dt):
    assert p.saturation_vapour_pressure(t1 + dt) > p.saturation_vapour_pressure(t1)


@relaxed
@given(lat=st.floats(-60.0, 60.0, **finite), doy=st.integers(1, 366))
def test_daily_extraterrestrial_is_positive_and_bounded(lat, doy):
    ra = p.extraterrestrial_daily(lat, doy)
    # Upper bound: the whole day at normal incidence at perihelion, 24 h x 60 x Gsc x 1.033.
    assert 0.0 < ra < 24 * 60 * p.SOLAR_CONSTANT * 1.033


@relaxed
@given(lat=st.floats(-60.0, 60.0, **finite), lon=st.floats(-180.0, 180.0, **finite),
       doy=st.integers(1, 365), hour=st.floats(0.5, 23.0, **finite))
def test_two_half_hours_make_the_hour(lat, lon, doy, hour):
    whole = p.extraterrestrial_hourly(lat, lon, doy, hour, 1.0)
    halves = p.extraterrestrial_hourly(lat, lon, doy, hour - 0.25, 0.5) + \
        p.extraterrestrial_hourly(lat, lon, doy, hour + 0.25, 0.5)
    # Equal unless the hour straddles local solar midnight (wrap), which
    # carries no sunlight below the polar circles anyway.
    assert halves == pytest.approx(whole, abs=1e-9)
    assert whole >= 0.0


@relaxed
@given(lat=st.floats(-60.0, 60.0, **finite), lon=st.floats(-180.0, 180.0, **finite),
       doy=st.integers(1, 366))
def test_sunrise_before_sunset_and_day_length(lat, lon, doy):
    rise, set_ = p.sunrise_sunset(lat, lon, doy)
    ws = p.sunset_hour_angle(lat, p.solar_declination(doy))
    assert rise < set_
    assert set_ - rise == pytest.approx(p.daylight_hours(ws), abs=1e-9)
    # At sunrise the eq.-31 hour angle is -omega_s.
    assert p.hour_angle(rise, lon, doy) == pytest.approx(-ws, abs=1e-9)


@relaxed
@given(mu=st.floats(-1.0, 1.0, **finite), z=st.floats(0.0, 3000.0, **finite),
       state=air_states(), kt=st.floats(0.5, 1.0, **finite),
       coefficients=st.sampled_from(sorted(p.BEAM_DIFFUSE_COEFFICIENTS)))
def test_beam_diffuse_clear_sky_between_zero_and_extraterrestrial(mu, z, state, kt, coefficients):
    _, ea = state
    pressure = p.atmospheric_pressure(z)
    w = p.precipitable_water(ea, pressure)
    ra = 1366.7 * max(mu, 0.0)
    rso = p.clear_sky_shortwave_beam_diffuse(ra, mu, pressure, w, kt, coefficients=coefficients)
    assert 0.0 <= rso <= ra
    if mu <= 0.0:
        assert rso == 0.0


@relaxed
@given(ndvi=st.floats(-1.0, 1.0, **finite))
def test_sobrino_emissivity_between_end_members(ndvi):
    eps = p.sobrino_2004_ndvi(ndvi)
    assert 0.97 <= eps <= 0.99 + 1e-12  # default soil and vegetation values


def test_sobrino_reduces_to_published_simplification():
    # Sobrino et al. (2004): with eps_s 0.97, eps_v 0.99, F 0.55 the mixed
    # range is eps = 0.004 Pv + 0.986 (from memory of the paper).
    for ndvi in (0.25, 0.35, 0.45):
        pv = ((ndvi - 0.2) / (0.5 - 0.2)) ** 2
        assert p.sobrino_2004_ndvi(ndvi) == pytest.approx(0.004 * pv + 0.986, abs=0.0005)


@relaxed
@given(rmax=st.floats(1.0, 900.0, **finite), frac=st.floats(0.05, 0.95, **finite),
       rise=st.floats(-6.0, 12.0, **finite), length=st.floats(6.0, 16.0, **finite))
def test_bisht_equals_the_integral_of_a_sine_shaped_day(rmax, frac, rise, length):
    # Bisht et al. (2005) assume Rn follows a sine from sunrise to sunset.
    # Build such a day, observe it once, and integrate it numerically
    # (trapezoid, 4001 points): the daytime total must come back.
    t = np.linspace(rise, rise + length, 4001)  # hours
    rn = rmax * np.sin(np.pi * (t - rise) / length)  # W m-2
    integral = np.trapezoid(rn, t * 3600.0) * 1e-6  # MJ m-2
    t_obs = rise + frac * length
    observed = rmax * math.sin(math.pi * frac)
    total = p.sinusoidal_daily_bisht_2005(observed, t_obs % 24.0, rise, rise + length)
    assert total == pytest.approx(integral, rel=1e-6)


def test_bisht_is_nan_outside_daylight():
    assert math.isnan(p.sinusoidal_daily_bisht_2005(-50.0, 2.0, 6.0, 18.0))
    assert math.isnan(p.sinusoidal_daily_bisht_2005(-50.0, 12.0, 12.0, 12.0))  # polar night


@relaxed
@given(k=st.floats(0.2, 0.9, **finite), peak=st.floats(100.0, 1100.0, **finite),
       frac=st.floats(0.05, 0.95, **finite), length=st.floats(6.0, 16.0, **finite))
def test_jackson_scaling_recovers_a_day_of_constant_ratio(k, peak, frac, length):
    # Jackson et al. (1983) scale an instant to the day by assuming that the
    # instant's ratio Rn/Rs holds all day.  No worked numbers of the paper are
    # at hand, so this checks that premise: build a day whose Rn is k Rs at
    # every minute (Rs shaped like sin^1.5 of the day's progress), integrate
    # both numerically and observe one instant.
    hours = np.linspace(0.0, 24.0, 24 * 60 + 1)
    rise = 12.0 - length / 2.0
    progress = np.clip((hours - rise) / length, 0.0, 1.0)
    rs = peak * np.sin(np.pi * progress) ** 1.5  # W m-2, zero at night
    rn = k * rs
    rs_day = np.trapezoid(rs, hours * 3600.0) * 1e-6  # MJ m-2 day-1
    rn_day = np.trapezoid(rn, hours * 3600.0) * 1e-6
    i = int(round((rise + frac * length) * 60.0))
    got = p.shortwave_ratio_daily_jackson_1983(rn[i], rs[i], rs_day)
    assert got == pytest.approx(rn_day, rel=1e-9)


def test_jackson_is_nan_without_sunlight():
    assert math.isnan(p.shortwave_ratio_daily_jackson_1983(-60.0, 0.0, 20.0))


@relaxed
@given(tmax=st.floats(250.0, 320.0, **finite), dt=st.floats(0.0, 25.0, **finite),
       rso=st.floats(0.0, 35.0, **finite), frac=st.floats(0.0, 1.5, **finite),
       ea=st.floats(0.01, 5.0, **finite))
def test_fao56_longwave_is_finite_and_capped(tmax, dt, rso, frac, ea):
    with np.errstate(divide="raise", invalid="raise"):  # no warnings leak, also Rso == 0
        rnl = p.fao56_net_longwave_daily(tmax, tmax - dt, ea, frac * rso, rso)
        capped = p.fao56_net_longwave_daily(tmax, tmax - dt, ea, rso, rso)
    assert math.isfinite(rnl)
    if frac >= 1.0:  # Rs/Rso is limited to 1 (FAO-56 eq. 39)
        assert rnl == pytest.approx(capped, rel=1e-12)


@relaxed
@given(tmax=st.floats(250.0, 320.0, **finite), dt=st.floats(0.0, 25.0, **finite),
       rso=st.floats(0.1, 35.0, **finite), frac=st.floats(0.0, 1.0, **finite),
       ea=st.floats(0.0, 5.0, **finite))
def test_fao56_longwave_is_never_a_gain(tmax, dt, rso, frac, ea):
    # Eq. 39 is a net *loss*: even under full overcast (Rs -> 0) the ratio
    # is held at 0.3, so the cloudiness factor stays positive; the humidity
    # factor 0.34 - 0.14 sqrt(ea) is positive below 5.9 kPa.
    daily = p.fao56_net_longwave_daily(tmax, tmax - dt, ea, frac * rso, rso)
    hourly = p.fao56_net_longwave_hourly(tmax, ea, frac * rso / 24.0, rso / 24.0)
    assert daily > 0.0 and hourly > 0.0
    overcast = p.fao56_net_longwave_daily(tmax, tmax - dt, ea, 0.3 * rso, rso)
    assert daily >= overcast * (1.0 - 1e-12)


def test_fao56_longwave_polar_night_takes_ratio_one():
    with np.errstate(divide="raise", invalid="raise"):
        rnl = p.fao56_net_longwave_daily(260.0, 250.0, 0.2, 0.0, 0.0)
    expected = p.STEFAN_BOLTZMANN_DAILY * (260.0**4 + 250.0**4) / 2 * (0.34 - 0.14 * 0.2**0.5)
    assert rnl == pytest.approx(expected, rel=1e-12)


@relaxed
@given(lat=st.floats(-60.0, 60.0, **finite), doy=st.integers(1, 366),
       z=st.floats(0.0, 3000.0, **finite))
def test_fao56_daily_net_radiation_is_sum_of_parts(lat, doy, z):
    c = p.fao56_net_radiation_components_daily(20.0, 300.0, 285.0, 1.5, lat, doy, z)
    assert c["net_radiation"] == pytest.approx(c["net_shortwave"] - c["net_longwave"])
    assert c["clear_sky_shortwave"] <= c["extraterrestrial"] * (0.75 + 2e-5 * 3000.0)


@relaxed
@given(year=st.integers(1950, 2050), doy=st.integers(1, 365), hour=st.floats(0, 24, **finite),
       lon=st.floats(-180, 180, **finite))
def test_michalsky_angles_in_range(year, doy, hour, lon):
    dec, omega = p.michalsky_1988(year, doy, hour, lon)
    assert abs(dec) <= math.radians(23.45)
    assert -math.pi <= omega < math.pi


def test_lookup_and_missing_classes():
    table = {10: 0.95, 80: 0.98}
    lut = p.build_lookup(table)
    assert lut.shape == (256,) and lut.dtype == np.float32
    assert lut[10] == np.float32(0.95) and np.isnan(lut[11])
    assert p.build_lookup(table, unknown=0.97)[11] == np.float32(0.97)
    assert p.build_lookup({300: 0.9}).shape == (301,)
    eps = p.emissivity_from_classes(np.array([[10, 80], [11, 999]]), lut)
    np.testing.assert_array_equal(np.isnan(eps), [[False, False], [True, True]])
    floats = p.emissivity_from_classes(np.array([10.0, np.nan, 10.5, -1.0]), lut)
    assert floats[0] == np.float32(0.95) and np.isnan(floats[1:]).all()
    assert p.missing_classes([10, 11, np.uint8(200), 80, 11], table) == [11, 200]
    with pytest.raises(ValueError, match="0 or more"):
        p.build_lookup({-1: 0.9})


def test_day_of_year_accepts_every_date_kind():
    import datetime as dt

    assert p.day_of_year(dt.date(2026, 7, 14)) == 195  # 14 July (FAO-56 Table 2.5)
    assert p.day_of_year(dt.datetime(2026, 7, 14, 18, 10)) == 195
    assert p.day_of_year(np.datetime64("2026-07-14T18:10")) == 195
    assert p.day_of_year("2026-07-14T18:10:00Z") == 195
    # Aware times go to UTC first: 00:30 on 15 July at UTC+2 is 14 July UTC.
    plus2 = dt.timezone(dt.timedelta(hours=2))
    assert p.day_of_year(dt.datetime(2026, 7, 15, 0, 30, tzinfo=plus2)) == 195
    assert p.day_of_year("2026-07-15T00:30:00+02:00") == 195
    assert p.day_of_year(np.int64(42)) == 42
    with pytest.raises(ValueError, match="ISO 8601"):
        p.day_of_year("14/07/2026")
    with pytest.raises(ValueError, match="1..366"):
        p.day_of_year(0)
    with pytest.raises(TypeError):
        p.day_of_year(3.5)


# --- Parton & Logan (1981) diurnal air temperature -----------------------------------


def test_parton_logan_parameters_are_the_published_ones():
    # Parton & Logan (1981) Table 1 (as quoted by secondary sources; the
    # paper itself not read): 150-cm air a = 1.86 h, b = 2.20, c = -0.17 h.
    assert p.PARTON_LOGAN_1981_PARAMETERS["air-150cm"] == {"a": 1.86, "b": 2.20, "c": -0.17}
    assert p.PARTON_LOGAN_1981_PARAMETERS["air-10cm"] == {"a": 1.52, "b": 2.00, "c": -0.18}


@pytest.mark.parametrize("c", [0.0, -0.17, 0.49])
def test_parton_logan_minimum_at_sunrise_maximum_after_noon(c):
    tmax, tmin, rise, set_ = 303.0, 288.0, 5.5, 19.5
    a = 1.86
    # The minimum sits at sunrise + c (at sunrise itself when c = 0).
    t_low = p.parton_logan_1981(tmax, tmin, rise + c, rise, set_, c=c)
    assert t_low == pytest.approx(tmin, abs=1e-9)
    # The maximum: Tmax, at solar noon + a + c, found on a 1-minute grid.
    hours = np.arange(0.0, 24.0, 1.0 / 60.0)
    temps = p.parton_logan_1981(tmax, tmin, hours, rise, set_, c=c)
    noon = (rise + set_) / 2.0
    assert hours[np.argmax(temps)] == pytest.approx(noon + a + c, abs=1.0 / 60.0)
    assert temps.max() == pytest.approx(tmax, abs=1e-4)
    assert 13.0 < noon + a + c < 16.0  # mid-afternoon


def test_parton_logan_is_continuous_at_sunset_and_falls_through_the_night():
    tmax, tmin, rise, set_ = 300.0, 280.0, 6.2, 18.4
    before = p.parton_logan_1981(tmax, tmin, set_ - 1e-7, rise, set_)
    after = p.parton_logan_1981(tmax, tmin, set_ + 1e-7, rise, set_)
    assert before == pytest.approx(after, abs=1e-5)
    night = p.parton_logan_1981(tmax, tmin, np.linspace(set_, 24.0 + rise - 0.17, 200),
                                rise, set_)
    assert np.all(np.diff(night) < 0.0)
    # It decays towards the next minimum: exp(-b) of the sunset excess is
    # left at the end (b = 2.2), as published.
    assert night[-1] - tmin == pytest.approx((night[0] - tmin) * math.exp(-2.2), rel=1e-3)


@relaxed
@given(tmin=st.floats(240.0, 310.0, **finite), dtr=st.floats(0.0, 25.0, **finite),
       next_drop=st.floats(-5.0, 5.0, **finite), hour=st.floats(0.0, 24.0, **finite),
       rise=st.floats(-3.0, 10.0, **finite), length=st.floats(4.0, 20.0, **finite),
       shift=st.integers(-1, 1))
def test_parton_logan_stays_between_the_extremes(tmin, dtr, next_drop, hour, rise, length, shift):
    tmax = tmin + dtr
    tmin_next = min(tmin + next_drop, tmax)
    t = p.parton_logan_1981(tmax, tmin, hour, rise, rise + length, tmin_next=tmin_next)
    assert min(tmin, tmin_next) - 1e-9 <= t <= tmax + 1e-9
    # Only the time of day matters: a whole day's shift of every clock reading
    # (e.g. a sunrise in the previous UTC day) gives the same temperature.
    moved = p.parton_logan_1981(tmax, tmin, hour + 24.0 * shift, rise - 24.0 * shift,
                                rise + length - 24.0 * shift, tmin_next=tmin_next)
    assert moved == pytest.approx(t, abs=1e-6)


def test_parton_logan_has_no_answer_in_polar_day_or_night():
    assert math.isnan(p.parton_logan_1981(280.0, 270.0, 12.0, 0.0, 24.0))
    assert math.isnan(p.parton_logan_1981(260.0, 250.0, 12.0, 12.0, 12.0))
