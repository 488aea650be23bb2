"""Evaluations: whole-body, hand-arm, daily exposure, machinery severity, building PPV, cautions."""

import json
import math

import numpy as np
import pytest
from scipy import integrate

import dsp
from dsp import Channel, SigtuneError, Weighting
from dsp.evaluation import (CAUTIONS, CLAUSES, EXPOSURE_VALUES, HEALTH_CAUTION_ZONE, combined_vdv,
                            daily_exposure, hand_arm, running_rms, vibration_dose_value, whole_body)
from dsp.severity import (BUILDING_GUIDELINES, SEVERITY_ZONES, building_ppv, guideline_velocity,
                          machine_severity, severity_zone)
from dsp.weighting import analog_weighting

FS_WB = 400.0  # whole-body rate: 4 x f2 of Wk/Wd
FS_HA = 5000.0  # hand-arm rate: about 4 x f2 of Wh


def tone(f, rms=1.0, fs=FS_WB, duration=60.0, unit="m/s^2", phase=0.0, name="ch"):
    t = np.arange(0, duration, 1 / fs)
    return Channel(rms * math.sqrt(2) * np.sin(2 * np.pi * f * t + phase), fs, name=name, unit=unit)


# ---- metrics ----
@pytest.mark.parametrize("amplitude, duration", [(1.0, 10.0), (2.5, 100.0), (0.3, 7.5)])
def test_vdv_of_a_sine(amplitude, duration):
    fs, f = 1000.0, 4.0  # whole periods in each duration
    t = np.arange(0, duration, 1 / fs)
    vdv = vibration_dose_value(amplitude * np.sin(2 * np.pi * f * t), fs)
    assert vdv == pytest.approx(amplitude * (3 * duration / 8) ** 0.25, rel=1e-9)  # analytic A (3T/8)^(1/4)


def test_running_rms_of_a_sine_and_a_burst():
    fs = 1000.0
    t = np.arange(0, 5, 1 / fs)
    r = running_rms(2.0 * np.sin(2 * np.pi * 10 * t), fs)
    np.testing.assert_allclose(r, 2.0 / math.sqrt(2), rtol=1e-9)  # analytic: whole periods in each 1 s window
    burst = np.zeros(5000)
    burst[1000:1500] = 3.0  # 0.5 s at 3 m/s^2
    assert running_rms(burst, fs).max() == pytest.approx(3.0 * math.sqrt(0.5), rel=1e-12)  # analytic


def test_combined_vdv():
    assert combined_vdv([4.0] * 16) == pytest.approx(8.0)  # analytic: (16 x 4^4)^(1/4) = 8


# ---- whole-body ----
@pytest.mark.parametrize("axis, weighting, f", [("z", "Wk", 1.0), ("z", "Wk", 8.0), ("z", "Wk", 40.0),
                                                ("x", "Wd", 1.0), ("y", "Wd", 4.0), ("x", "Wd", 16.0)])
def test_aw_of_a_pure_tone(axis, weighting, f):
    res = whole_body({axis: tone(f, rms=0.7, phase=0.4)}, exposure_h=8.0)
    fig = res.axes[axis]
    assert fig.weighting == weighting
    # analytic: RMS x |W(f)| (the standard's formula, ISO 2631-1 Annex A)
    assert fig.a_w == pytest.approx(0.7 * abs(analog_weighting(weighting, f)), rel=3e-3)
    assert fig.mtvv_ratio == pytest.approx(1.0, abs=0.01)  # analytic: steady tone
    assert fig.vdv_ratio == pytest.approx(math.sqrt(2) * 0.375 ** 0.25, rel=3e-3)  # analytic: sqrt(2)(3/8)^(1/4)
    assert fig.crest_factor == pytest.approx(math.sqrt(2), rel=0.02)  # analytic
    assert res.basic_method_adequate


def test_wk_at_8hz_against_the_table():
    res = whole_body(tone(8.0, rms=1.0), axis="z")
    assert res.axes["z"].a_w == pytest.approx(1.036, rel=4e-3)  # ISO 2631-1:1997 Table 3 (from memory)


def test_unit_conversion_from_g():
    res = whole_body({"z": tone(5.0, rms=0.1, unit="g")})
    assert res.axes["z"].a_w == pytest.approx(0.1 * 9.80665 * abs(analog_weighting("Wk", 5.0)), rel=3e-3)


def test_vector_sum_uses_health_factors():
    chans = {"x": tone(2.0, 0.3, name="seat_x"), "y": tone(2.0, 0.2, name="seat_y"),
             "z": tone(6.3, 0.4, name="seat_z")}
    res = whole_body(chans, posture="seated", purpose="health")
    ax = res.axes
    assert (ax["x"].k, ax["y"].k, ax["z"].k) == (1.4, 1.4, 1.0)  # ISO 2631-1:1997 clause 7.2.3
    expected = math.sqrt((1.4 * ax["x"].a_w) ** 2 + (1.4 * ax["y"].a_w) ** 2 + ax["z"].a_w ** 2)
    assert res.vector_sum == pytest.approx(expected, rel=1e-12)  # ISO 2631-1 clause 6.5 eq. 11
    # dominant: 1.4 x 0.3 x Wd(2) = 0.374 < 0.4 x Wk(6.3) = 0.422 (ISO 2631-1 Table 3 factors)
    assert res.dominant_axis == "z"


def test_comfort_factors_and_reactions():
    res = whole_body({"z": tone(6.3, 0.5), "back_x": tone(6.3, 0.5, name="back")}, purpose="comfort")
    assert res.axes["back_x"].weighting == "Wc" and res.axes["back_x"].k == 0.8  # ISO 2631-1 Table 1 (memory)
    a_v = res.comfort["a_v"]
    assert a_v == pytest.approx(res.vector_sum)
    assert "fairly uncomfortable" in res.comfort["likely_reactions"]  # ISO 2631-1 Annex C.2.3: 0.5-1 m/s^2
    assert res.daily == {}


@pytest.mark.parametrize("hours", [0.5, 2.0, 4.0, 8.0, 12.0])
def test_a8_scales_with_the_square_root_of_time(hours):
    res = whole_body({"x": tone(1.0, 0.5)}, exposure_h=hours)
    a_w = res.axes["x"].a_w
    # Directive 2002/44/EC Annex B.1: A(8) = k a_w sqrt(T / 8 h)
    assert res.daily["a8"] == pytest.approx(1.4 * a_w * math.sqrt(hours / 8.0), rel=1e-12)
    t_s = hours * 3600
    assert res.daily["evdv"] == pytest.approx(1.4 * 1.4 * a_w * t_s ** 0.25)  # eVDV = 1.4 (k a_w) T^(1/4)
    vdv = res.axes["x"].vdv
    duration = res.axes["x"].duration_s
    assert res.daily["vdv_day"] == pytest.approx(1.4 * vdv * (t_s / duration) ** 0.25)  # fourth-power time law


def test_caution_zone_boundaries_follow_both_equations():
    low, high = HEALTH_CAUTION_ZONE["B.1_a8_m_s2"]
    res8 = whole_body({"z": tone(6.3, 0.6)}, exposure_h=8.0).daily
    res2 = whole_body({"z": tone(6.3, 0.6)}, exposure_h=2.0).daily
    assert res8["caution_zone_b1"]["boundaries_m_s2"] == pytest.approx([low, high])
    # ISO 2631-1 Annex B eq. B.1: a_w1 T1^(1/2) = a_w2 T2^(1/2): a quarter of the time, twice the value
    assert res2["caution_zone_b1"]["boundaries_m_s2"] == pytest.approx([2 * low, 2 * high])
    # eq. B.2: a_w1 T1^(1/4) = a_w2 T2^(1/4): a quarter of the time, sqrt(2) times the value
    b2_8, b2_2 = res8["caution_zone_b2"]["boundaries_m_s2"], res2["caution_zone_b2"]["boundaries_m_s2"]
    assert b2_2[0] / b2_8[0] == pytest.approx(math.sqrt(2))
    assert res8["caution_zone_b1"]["zone"] == "within the zone"  # 0.6 x 1.054 = 0.63 m/s^2 (Table 3)
    assert res2["caution_zone_b1"]["zone"] == "below the zone"


@pytest.mark.parametrize("rms, level", [(0.45, "below the action value"), (0.55, "at or above the action value"),
                                        (1.2, "at or above the limit value")])
def test_whole_body_action_and_limit_values(rms, level):
    # z at 6.3 Hz: a_w = rms x 1.054 (ISO 2631-1 Table 3); Directive 2002/44/EC Art. 3(2): 0.5 and 1.15 m/s^2
    res = whole_body({"z": tone(6.3, rms / 1.054)}, exposure_h=8.0)
    assert res.daily["a8"] == pytest.approx(rms, rel=3e-3)
    assert res.daily["a8_level"] == level


def test_shocks_fail_the_basic_method_tests():
    fs = FS_WB
    x = 0.05 * np.random.default_rng(7).standard_normal(int(60 * fs))
    x[int(30 * fs):int(30 * fs) + 20] += 8.0  # one jolt
    res = whole_body({"z": Channel(x, fs)})
    fig = res.axes["z"]
    assert fig.crest_factor > 9 and not res.basic_method_adequate
    assert any("6.2.1" in n for n in res.notes) and any("6.3.3" in n for n in res.notes)


def test_whole_body_errors():
    with pytest.raises(SigtuneError, match="seated people only.*posture='standing'"):
        whole_body({"z": tone(4.0)}, posture="standing")
    with pytest.raises(SigtuneError, match=r"axis.*must be one of 'x', 'y', 'z'; got 'q'"):
        whole_body({"q": tone(4.0)})
    with pytest.raises(SigtuneError, match="no axis"):
        whole_body([tone(4.0)])
    with pytest.raises(SigtuneError, match="already weighted with Wd.*needs Wk"):
        whole_body({"z": Weighting("Wd").apply(tone(4.0))})
    with pytest.raises(SigtuneError, match="exposure_h.*<= 24 h; got 30"):
        whole_body({"z": tone(4.0)}, exposure_h=30)
    with pytest.raises(SigtuneError, match=r"axis 'z'.*at least 200 Hz"):
        whole_body({"z": tone(4.0, fs=100.0)})
    with pytest.raises(SigtuneError, match=r"only 0\.6\d* s are left of 4\.5 s.*needs 1 s"):
        whole_body({"z": tone(4.0, duration=4.5)})  # Wk settles in 3.9 s (0.1 % of its slowest mode)


def test_pre_weighted_channel_is_not_weighted_twice():
    raw = tone(4.0, 0.5)
    a = whole_body({"z": raw}).axes["z"].a_w
    b = whole_body({"z": Weighting("Wk").apply(raw)}).axes["z"].a_w
    assert a == pytest.approx(b, rel=1e-12)


def test_single_channel_from_metadata_or_axis():
    ch = tone(4.0).replace(metadata={"axis": "z"})
    assert whole_body([ch]).axes["z"].a_w == pytest.approx(whole_body(tone(4.0), axis="z").axes["z"].a_w)


# ---- hand-arm ----
def test_hand_arm_total_value_and_a8():
    chans = {"x": tone(16.0, 2.0, fs=FS_HA, duration=8.0), "y": tone(63.0, 3.0, fs=FS_HA, duration=8.0),
             "z": tone(250.0, 4.0, fs=FS_HA, duration=8.0)}
    res = hand_arm(chans, exposure_h=3.0)
    w = {a: abs(analog_weighting("Wh", f)) for a, f in (("x", 16.0), ("y", 63.0), ("z", 250.0))}
    for axis, rms in (("x", 2.0), ("y", 3.0), ("z", 4.0)):
        assert res.axes[axis].a_w == pytest.approx(rms * w[axis], rel=3e-3)  # analytic x ISO 5349-1 Annex A
    expected = math.sqrt(sum(res.axes[a].a_w ** 2 for a in "xyz"))
    assert res.a_hv == pytest.approx(expected, rel=1e-12)  # ISO 5349-1 clause 4.2 eq. 1
    assert res.daily["a8"] == pytest.approx(res.a_hv * math.sqrt(3.0 / 8.0))  # ISO 5349-1 clause 5 eq. 2
    assert res.all_axes


def test_hand_arm_single_axis_is_flagged():
    res = hand_arm(tone(31.5, 1.0, fs=FS_HA, duration=5.0), axis="z")
    assert not res.all_axes and any("underestimated" in n for n in res.notes)


@pytest.mark.parametrize("a8, level", [(2.4, "below the action value"), (2.5, "at or above the action value"),
                                       (4.99, "at or above the action value"),
                                       (5.0, "at or above the limit value")])
def test_hand_arm_action_and_limit_values(a8, level):
    res = daily_exposure([(a8, 8.0)], kind="hand_arm")  # Directive 2002/44/EC Art. 3(1): 2.5 and 5 m/s^2
    assert res.a8 == pytest.approx(a8) and res.level == level


def test_daily_exposure_from_several_tasks():
    # ISO 5349-1 clause 5 eq. 3: A(8) = sqrt(1/T0 sum a_i^2 T_i); a worked sum by hand:
    # (3.5^2 x 2 + 6^2 x 0.5 + 2^2 x 4) / 8 = (24.5 + 18 + 16) / 8 = 7.3125
    res = daily_exposure([(3.5, 2.0), (6.0, 0.5), (2.0, 4.0)])
    assert res.a8 == pytest.approx(math.sqrt(7.3125), rel=1e-12)
    assert res.total_h == 6.5
    assert res.level == "at or above the action value"
    # whole-body partial exposures combine the same way (Directive 2002/44/EC Annex B.1)
    wb = daily_exposure([(0.8, 2.0), (0.4, 6.0)], kind="whole_body")
    assert wb.a8 == pytest.approx(math.sqrt((0.64 * 2 + 0.16 * 6) / 8))
    assert wb.level == "at or above the action value"


@pytest.mark.parametrize("factor", [0.25, 1.0, 4.0])
def test_daily_exposure_scales_with_sqrt_time(factor):
    base = daily_exposure([(3.0, 2.0)]).a8
    assert daily_exposure([(3.0, 2.0 * factor)]).a8 == pytest.approx(base * math.sqrt(factor))  # Directive Annex A


def test_daily_exposure_errors():
    with pytest.raises(SigtuneError, match=r"pairs\[1\] T.*<= 24 h; got 30"):
        daily_exposure([(2.0, 1.0), (2.0, 30.0)])
    with pytest.raises(SigtuneError, match=r"pairs\[0\]: each item must be"):
        daily_exposure([3.0])


# ---- machinery ----
BOUNDARY_CASES = [(g, s, i) for (g, s) in SEVERITY_ZONES for i in range(3)]


@pytest.mark.parametrize("group, support, index", BOUNDARY_CASES)
def test_zone_boundaries(group, support, index):
    boundary = SEVERITY_ZONES[(group, support)][index]  # ISO 10816-3:2009 Tables A.1/A.2 (from memory)
    below, above = "ABCD"[index], "ABCD"[index + 1]
    assert severity_zone(boundary * 0.999, group, support) == below
    assert severity_zone(boundary, group, support) == above  # on the boundary: the zone above
    assert severity_zone(boundary * 1.001, group, support) == above


def test_zone_table_values():
    # ISO 10816-3:2009 Annex A, as recalled in the brief (from memory)
    assert SEVERITY_ZONES == {(1, "rigid"): (2.3, 4.5, 7.1), (1, "flexible"): (3.5, 7.1, 11.0),
                              (2, "rigid"): (1.4, 2.8, 4.5), (2, "flexible"): (2.3, 4.5, 7.1)}


@pytest.mark.parametrize("f", [12.0, 50.0, 300.0, 950.0])
def test_velocity_rms_from_acceleration(f):
    fs, amplitude = 5000.0, 8.0
    t = np.arange(0, 10, 1 / fs)
    ch = Channel(amplitude * np.sin(2 * np.pi * f * t + 0.2), fs, unit="m/s^2")
    res = machine_severity(ch, group=2, support="flexible")
    expected = 1e3 * amplitude / math.sqrt(2) / (2 * math.pi * f)  # analytic: v = a / (2 pi f)
    assert res.velocity_rms_mm_s == pytest.approx(expected, rel=3e-3)
    assert res.zone == severity_zone(expected, 2, "flexible")


def test_band_depends_on_speed():
    fs = 5000.0
    t = np.arange(0, 20, 1 / fs)
    v = 3.0 * np.sin(2 * np.pi * 5.0 * t) + 4.0 * np.sin(2 * np.pi * 50.0 * t)  # mm/s
    ch = Channel(v, fs, unit="mm/s")
    fast = machine_severity(ch, 1, "rigid")
    slow = machine_severity(ch, 1, "rigid", rpm=300)
    assert fast.band_hz == [10.0, 1000.0] and slow.band_hz == [2.0, 1000.0]  # ISO 10816-3 (from memory)
    assert fast.velocity_rms_mm_s == pytest.approx(4.0 / math.sqrt(2), rel=3e-3)  # analytic: 5 Hz left out
    assert slow.velocity_rms_mm_s == pytest.approx(5.0 / math.sqrt(2), rel=3e-3)  # analytic: sqrt(3^2+4^2)/sqrt2
    assert any("rpm not given" in n for n in fast.notes)


@pytest.mark.parametrize("baseline, alarm", [(1.0, 1.0 + 0.25 * 4.5), (5.0, 1.25 * 4.5)])
def test_alarm_and_trip_from_baseline(baseline, alarm):
    ch = tone(50.0, 2.0, fs=4000.0, duration=5.0, unit="mm/s")
    res = machine_severity(ch, 1, "rigid", baseline_mm_s=baseline)
    # ISO 10816-3 clause 6.5 (from memory): baseline + 0.25 x B/C, capped at 1.25 x B/C; trip C/D, cap 1.25 x C/D
    assert res.alarm_mm_s == pytest.approx(alarm)
    assert res.trip_mm_s == 7.1 and res.trip_max_mm_s == pytest.approx(1.25 * 7.1)


def test_machine_severity_errors():
    with pytest.raises(SigtuneError, match="at least 2000 Hz; got 1000 Hz"):
        machine_severity(tone(50.0, fs=1000.0), 1, "rigid")
    with pytest.raises(SigtuneError, match="group: must be one of 1, 2; got 3"):
        machine_severity(tone(50.0, fs=4000.0), 3, "rigid")
    with pytest.raises(SigtuneError, match="support: must be one of 'rigid', 'flexible'"):
        severity_zone(1.0, 1, "soft")


# ---- buildings ----
@pytest.mark.parametrize("building_class", sorted(BUILDING_GUIDELINES))
def test_guideline_corners_and_interpolation(building_class):
    corners = BUILDING_GUIDELINES[building_class]  # DIN 4150-3:2016 Table 1 (from memory)
    for f, value in corners:
        assert guideline_velocity(f, building_class) == pytest.approx(value)
    (f10, v10), (f50, v50) = corners[1], corners[2]
    assert (f10, f50) == (10.0, 50.0)  # the Table's corner frequencies, Hz
    assert guideline_velocity(20.0, building_class) == pytest.approx(v10 + (v50 - v10) * 10 / 40)  # linear
    assert guideline_velocity(250.0, building_class) == pytest.approx(corners[-1][1])  # above 100 Hz


def test_ppv_of_velocity_tone_and_its_frequency():
    fs = 2000.0
    t = np.arange(0, 3, 1 / fs)
    ch = Channel(6.0 * np.sin(2 * np.pi * 23.0 * t + 0.3), fs, unit="mm/s")
    for method in ("zero_crossing", "spectrum"):
        res = building_ppv({"x": ch}, "residential", frequency_method=method)
        axis = res.axes["x"]
        assert axis["ppv_mm_s"] == pytest.approx(6.0, rel=1e-3)  # analytic
        assert axis["frequency_hz"] == pytest.approx(23.0, rel=0.01)  # analytic
        guideline = 5.0 + 10.0 * 13 / 40  # DIN 4150-3 Table 1 line 2, 5 mm/s at 10 Hz to 15 at 50 Hz
        assert axis["guideline_mm_s"] == pytest.approx(guideline, rel=0.01)
        assert axis["ratio"] == pytest.approx(6.0 / guideline, rel=0.01) and not res.exceeds_guideline


def test_ppv_from_an_acceleration_burst():
    fs = 2000.0
    t = np.arange(0, 4, 1 / fs)
    accel = 4.0 * np.exp(-((t - 2.0) / 0.08) ** 2) * np.sin(2 * np.pi * 30.0 * t)  # m/s^2
    reference = integrate.cumulative_trapezoid(accel, t, initial=0.0) * 1e3  # scipy reference, mm/s
    res = building_ppv(Channel(accel, fs, unit="m/s^2"), "commercial", axis="z")
    assert res.axes["z"]["ppv_mm_s"] == pytest.approx(np.max(np.abs(reference)), rel=0.01)
    assert res.axes["z"]["frequency_hz"] == pytest.approx(30.0, rel=0.05)
    assert not res.exceeds_guideline  # about 21 mm/s against 35 mm/s at 30 Hz (line 1)


def test_top_floor_compares_horizontal_axes_only():
    ch = tone(20.0, 5.0, fs=1000.0, duration=2.0, unit="mm/s")
    res = building_ppv({"x": ch, "z": ch.replace(name="v")}, "sensitive", location="top_floor")
    assert res.axes["x"]["guideline_mm_s"] == 8.0  # DIN 4150-3 Table 1 top floor, line 3 (from memory)
    assert res.axes["z"]["ratio"] is None and res.governing_axis == "x"


# ---- cautions on every result ----
RESULT_FACTORIES = {
    "whole_body": lambda: whole_body({"z": tone(4.0)}, exposure_h=2.0),
    "hand_arm": lambda: hand_arm(tone(31.5, 1.0, fs=FS_HA, duration=3.0), axis="x", exposure_h=1.0),
    "daily_exposure": lambda: daily_exposure([(3.0, 2.0)]),
    "machine_severity": lambda: machine_severity(tone(50.0, fs=4000.0, duration=5.0), 1, "rigid"),
    "building_ppv": lambda: building_ppv(tone(20.0, fs=1000.0, duration=2.0, unit="mm/s"), axis="z"),
}


@pytest.mark.parametrize("kind", sorted(RESULT_FACTORIES))
def test_every_result_has_its_caution_and_clause(kind):
    result = RESULT_FACTORIES[kind]()
    data = result.to_dict()
    json.dumps(data)  # JSON-ready
    assert data["caution"] == CAUTIONS[kind] == result.caution
    assert data["clause"] == CLAUSES[kind] == result.clause
    for phrase in ("sensor mounting", "axes and exposure times", "guidance", "local regulations",
                   "contracts", "manufacturer", "competent professionals"):
        assert phrase in data["caution"]  # the required content


def test_exposure_values_are_the_directive_values():
    # Directive 2002/44/EC Article 3
    assert EXPOSURE_VALUES == {"hand_arm": {"action_a8": 2.5, "limit_a8": 5.0},
                               "whole_body": {"action_a8": 0.5, "limit_a8": 1.15,
                                              "action_vdv": 9.1, "limit_vdv": 21.0}}


def test_evaluations_importable_from_dsp():
    for name in ("weighting_filter", "Weighting", "whole_body", "hand_arm", "severity_zone",
                 "machine_severity", "building_ppv", "daily_exposure", "CAUTIONS"):
        assert hasattr(dsp, name), name
    assert dsp.evaluation.machine_severity is machine_severity  # how dsp.analysis reaches it
