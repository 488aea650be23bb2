"""dsp.analysis: the settings as data and the summary figures the app and the batch runner share."""

import json
import math

import numpy as np
import pytest

import dsp
from dsp import Channel, Filter, SigtuneError
from dsp.analysis import (AnalysisSettings, AuditSettings, IntegrationSettings, SpectrumSettings, _json_ready,
                          analyse)

FS = 1000.0


def _sine(amplitude=1.0, freq=50.0, fs=FS, seconds=20.0, unit="m/s^2", **kw):
    t = np.arange(int(seconds * fs)) / fs
    return Channel(amplitude * np.sin(2 * np.pi * freq * t), fs, name="x", unit=unit, **kw)


QUIET = AnalysisSettings(integration={"methods": []})


# ------------------------------------------------------------------ settings
def test_defaults_are_those_of_the_shared_contract():
    s = AnalysisSettings()
    assert s.to_dict() == {
        "spectrum": {"window": "hann", "segment_s": None, "overlap": 0.5, "average": "mean", "detrend": "constant"},
        "band_fraction": 3, "n_peaks": 5,
        "integration": {"methods": ["time", "frequency", "baseline"], "target": "velocity", "f_low": None},
        "evaluation": None, "audit": {"full_scale": None}}


def test_sections_accept_objects_or_dicts_and_read_by_attribute_or_key():
    a = AnalysisSettings(spectrum=SpectrumSettings(window="hamming"), integration=IntegrationSettings(methods=[]),
                         audit=AuditSettings(full_scale=10.0))
    b = AnalysisSettings(spectrum={"window": "hamming"}, integration={"methods": []}, audit={"full_scale": 10})
    assert a == b
    assert b.spectrum.window == b.spectrum["window"] == "hamming"
    assert AnalysisSettings.from_dict(a.to_dict()) == a
    assert AnalysisSettings(spectrum={"window": "Kaiser:8.6"}).spectrum.window == "kaiser:8.6"


@pytest.mark.parametrize("data, message", [
    ({"spectrum": {"window": "blackman"}}, r"analysis\.spectrum\.window: unknown window; got 'blackman'"),
    ({"spectrum": {"segment_s": 0}}, r"analysis\.spectrum\.segment_s: must be > 0 s; got 0"),
    ({"spectrum": {"overlap": 1.0}}, r"analysis\.spectrum\.overlap: must be 0 <= x <= 0.95; got 1"),
    ({"spectrum": {"average": "median"}}, r"analysis\.spectrum\.average: must be one of 'mean', 'peak'"),
    ({"spectrum": {"detrend": "quadratic"}}, r"analysis\.spectrum\.detrend: must be one of 'none', 'constant'"),
    ({"spectrum": {"colour": 1}}, r"analysis\.spectrum\.colour: unknown key 'colour'; valid keys: window, segment_s"),
    ({"band_fraction": 6}, r"analysis\.band_fraction: must be one of 0, 1, 3; got 6"),
    ({"n_peaks": 101}, r"analysis\.n_peaks: must be a whole number from 0 to 100; got 101"),
    ({"integration": {"methods": "time"}}, r"analysis\.integration\.methods: must be a list of methods"),
    ({"integration": {"methods": ["time", "time"]}}, r"analysis\.integration\.methods: lists a method twice"),
    ({"integration": {"methods": ["spline"]}}, r"analysis\.integration\.methods\[0\]: must be one of 'time'"),
    ({"integration": {"target": "jerk"}}, r"analysis\.integration\.target: must be one of 'velocity', 'displacement'"),
    ({"integration": {"f_low": -1}}, r"analysis\.integration\.f_low: must be > 0 Hz; got -1"),
    ({"evaluation": {"kind": "noise"}}, r"analysis\.evaluation\.kind: must be one of 'machine_severity', 'whole_body'"),
    ({"evaluation": "machine_severity"}, r"analysis\.evaluation: must be null or an object with a 'kind' key"),
    ({"evaluation": {"kind": "whole_body", "seat": 1}},
     r"analysis\.evaluation\.seat: unknown setting 'seat' for whole_body; valid settings: posture, purpose"),
    ({"audit": {"full_scale": 0}}, r"analysis\.audit\.full_scale: must be > 0; got 0"),
    ({"peaks": 3}, r"analysis\.peaks: unknown key 'peaks'; valid keys: spectrum, band_fraction, n_peaks"),
])
def test_bad_settings_name_the_setting_and_the_valid_values(data, message):
    with pytest.raises(SigtuneError, match=message):
        AnalysisSettings.from_dict(data)


# ------------------------------------------------------------------ statistics
def test_statistics_of_a_sine_are_analytic():
    summary = analyse(_sine(amplitude=3.0), QUIET)
    # analytic: RMS A/sqrt(2), peak A, crest factor sqrt(2), mean 0 over whole periods
    assert summary["rms"] == pytest.approx(3.0 / math.sqrt(2), rel=1e-9)
    assert summary["peak"] == pytest.approx(3.0, rel=1e-6)
    assert summary["crest_factor"] == pytest.approx(math.sqrt(2), rel=1e-6)
    assert abs(summary["mean"]) < 1e-12
    assert summary["statistics_samples"] == 20_000 and summary["edge_zones_excluded_s"] == []
    assert (summary["channel"], summary["unit"], summary["fs_hz"], summary["duration_s"]) == ("x", "m/s^2", FS, 20.0)


def test_statistics_leave_out_the_filter_edge_zone():
    raw = _sine(start_time=5.0)
    flt = Filter(band="highpass", cutoff=5.0)
    filtered = flt.apply(raw)
    zone = dsp.edge_zones(filtered)
    assert len(zone) == 1 and zone[0][0] == 5.0
    summary = analyse(filtered, QUIET)
    blocked = math.floor((zone[0][1] - 5.0) * FS + 1e-9) + 1  # samples 0 .. end of the zone, inclusive
    assert summary["statistics_samples"] == 20_000 - blocked
    # outside the zone the sine has settled: RMS = |H(50 Hz)| / sqrt(2) (analytic steady state)
    gain = abs(flt.response(FS, [50.0])[0])
    assert summary["rms"] == pytest.approx(gain / math.sqrt(2), rel=1e-4)
    assert summary["edge_zones_excluded_s"] == [list(z) for z in zone]


def test_a_channel_that_is_all_edge_zone_is_an_error():
    short = Filter(band="highpass", cutoff=0.5, order=8)
    with pytest.warns(dsp.SigtuneWarning):
        filtered = short.apply(_sine(seconds=1.0))
    with pytest.raises(SigtuneError, match=r"channel 'x'"):
        analyse(filtered, QUIET)


# ------------------------------------------------------------------ spectrum, peaks, bands
def test_peaks_follow_the_spectrum_settings():
    tones = _sine(amplitude=2.0, freq=62.5).data + _sine(amplitude=0.5, freq=140.0).data
    ch = _sine().replace(data=tones)
    summary = analyse(ch, AnalysisSettings(spectrum={"window": "hamming", "segment_s": 2.0}, n_peaks=2,
                                           band_fraction=0, integration={"methods": []}))
    assert summary["spectrum"]["settings"]["window"] == "hamming"
    assert summary["spectrum"]["settings"]["nperseg"] == 2000
    peaks = summary["peaks"]
    assert [round(p["frequency_hz"], 1) for p in peaks] == [62.5, 140.0]  # the synthesised tones
    # a tone of RMS A/sqrt(2): find_peaks returns its RMS amplitude from the PSD
    assert peaks[0]["amplitude"] == pytest.approx(2.0 / math.sqrt(2), rel=0.02)
    assert summary["band_levels"] is None


@pytest.mark.parametrize("fraction, band", [(1, "63"), (3, "50")])  # IEC 61260-1 nominal mid-frequencies
def test_band_levels_put_a_tone_in_its_band(fraction, band):
    summary = analyse(_sine(amplitude=math.sqrt(2), freq=50.0), AnalysisSettings(
        band_fraction=fraction, integration={"methods": []}))
    bands = summary["band_levels"]
    assert bands["fraction"] == fraction
    loudest = bands["nominal"][int(np.argmax(bands["values"]))]
    assert loudest == band
    assert max(bands["values"]) == pytest.approx(1.0, rel=0.01)  # a 1 RMS tone, all in one band
    assert bands["total_rms"] == pytest.approx(summary["rms"], rel=0.01)  # Parseval


def test_no_peaks_when_none_are_asked_for():
    assert analyse(_sine(), AnalysisSettings(n_peaks=0, band_fraction=0, integration={"methods": []}))["peaks"] == []


# ------------------------------------------------------------------ findings, integration, evaluation
def test_findings_and_valid_duration_are_the_audits():
    data = _sine().data.copy()
    data[5000:5400] = 0.0  # a drop-out
    ch = _sine().replace(data=data)
    summary = analyse(ch, AnalysisSettings(audit={"full_scale": 2.0}, band_fraction=0, integration={"methods": []}))
    report = dsp.audit(ch, full_scale=2.0)
    assert summary["findings"] == [f.to_dict(FS, 0.0) for f in report.findings]
    assert summary["valid_duration_s"] == report.valid_duration_s
    assert any(f["start"] <= 5000 and f["stop"] >= 5400 for f in summary["findings"])


def test_integration_rows_give_the_analytic_velocity():
    amplitude, freq = 2.0, 25.0
    summary = analyse(_sine(amplitude, freq), AnalysisSettings(band_fraction=0, integration={
        "methods": ["time", "frequency", "baseline"], "target": "velocity", "f_low": 2.0}))
    rows = summary["integration"]["rows"]
    assert [r["method"] for r in rows] == ["time", "frequency", "baseline"]
    for row in rows:  # analytic: A sin(wt) -> velocity amplitude A/w, RMS A/(w sqrt 2)
        assert row["rms"] == pytest.approx(amplitude / (2 * math.pi * freq) / math.sqrt(2), rel=0.02), row["method"]


def test_integration_is_skipped_with_a_reason_for_a_displacement_channel():
    summary = analyse(_sine(unit="mm"), AnalysisSettings(band_fraction=0))
    assert summary["integration"] == {"skipped": "a displacement channel cannot be integrated to velocity"}


def test_machine_severity_is_reported_with_its_zone_and_caution():
    velocity_rms_mm_s, freq = 5.0, 80.0
    amplitude = velocity_rms_mm_s * 1e-3 * math.sqrt(2) * 2 * math.pi * freq  # m/s^2 giving 5 mm/s RMS
    ch = _sine(amplitude, freq, fs=5000.0, seconds=10.0)
    summary = analyse(ch, AnalysisSettings(band_fraction=0, integration={"methods": []}, evaluation={
        "kind": "machine_severity", "group": 1, "support": "rigid", "rpm": 1480}))
    result = summary["evaluation"]
    assert result["kind"] == "machine_severity"
    assert result["velocity_rms_mm_s"] == pytest.approx(velocity_rms_mm_s, rel=0.02)  # analytic
    assert result["zone"] == "C"  # ISO 10816-3:2009 Table A.1, group 1 rigid: B/C 4.5, C/D 7.1 mm/s (from memory)
    assert result["caution"] and result["clause"]


def test_whole_body_weights_a_vertical_tone():
    ch = _sine(math.sqrt(2), 6.3, fs=400.0, seconds=60.0, metadata={"axis": "z"})
    summary = analyse(ch, AnalysisSettings(band_fraction=0, integration={"methods": []}, evaluation={
        "kind": "whole_body", "posture": "seated", "purpose": "health", "exposure_h": 8.0}))
    # ISO 2631-1:1997 Table 3: Wk at 6.3 Hz is 1.054 (x1000 in the table); 1 m/s^2 RMS in
    assert summary["evaluation"]["axes"]["z"]["a_w"] == pytest.approx(1.054, rel=0.02)


def test_the_summary_is_json_ready_and_repeatable():
    ch = _sine()
    first = analyse(ch)
    assert json.loads(json.dumps(first, allow_nan=False)) == first
    assert analyse(ch) == first
    assert _json_ready({"a": np.float64("nan"), "b": (1, np.int64(2)), "c": np.float32(0.5)}) == {
        "a": None, "b": [1, 2], "c": 0.5}


def test_analyse_wants_a_channel():
    with pytest.raises(SigtuneError, match=r"channel: expected a dsp\.Channel; got ndarray"):
        analyse(np.zeros(10))
