"""Demo recordings of invented scenarios, generated from a seed, with known truths.

Every scenario is made up for sigtune (the sites, machines and sensors do not
exist). Because the signals are synthesised, their content is known exactly:
:func:`demo_truths` returns the frequencies, amplitudes and sample ranges of
every component and defect, and ``docs/demo.md`` lists them. Tests and the
dashboard use the same recordings.

Scenarios (:data:`DEMO_SCENARIOS`)
    ``pump_skid`` (default)
        Three accelerometers on a raw-water pump skid, 5120 Hz, 20 s: running
        speed 24.6 Hz and two harmonics, a bearing tone, band-limited noise, a
        slow DC drift, a clipped burst, a drop-out and an impact.
    ``floor_footfall``
        Vertical floor acceleration at midspan and quarter span of an office
        bay, 512 Hz, 64 s: a walker crossing at 1.95 steps/s excites the
        7.8 Hz floor mode through the 4th walking harmonic.
    ``vehicle_seat``
        Three-axis seat-pan acceleration of a utility vehicle on a rough track,
        500 Hz, 60 s: shaped random vibration, an engine tone and three shocks.
"""

from __future__ import annotations

import copy
import functools
import os
from pathlib import Path

import numpy as np
from scipy import signal

from ._atomic import write_text_atomic
from ._validate import check_choice
from .channel import Channel, Recording
from .io import write
from .io._common import to_json
from .io.wav import sidecar_path
from .units import STANDARD_GRAVITY

__all__ = ["DEMO_SCENARIOS", "demo_recording", "demo_truths", "write_demo"]

#: Scenario name -> one-line description. The first is the default.
DEMO_SCENARIOS: dict[str, str] = {
    "pump_skid": "three accelerometers on an invented raw-water pump skid (5120 Hz, 20 s)",
    "floor_footfall": "floor vertical acceleration under a walker, for a floor/footbridge check "
                      "(512 Hz, 64 s)",
    "vehicle_seat": "three-axis seat-pan acceleration of an invented utility vehicle (500 Hz, 60 s)",
}
_SEEDS = {"pump_skid": 24_600, "floor_footfall": 7_800, "vehicle_seat": 2_631}
#: Formats (extensions) that :func:`write_demo` writes for every scenario.
_DEMO_FORMATS = ("csv", "tsv", "wav", "h5", "npz")


def _tone(t: np.ndarray, freq: float, amplitude: float, phase: float) -> np.ndarray:
    return amplitude * np.sin(2 * np.pi * freq * t + phase)


def _ringdown(t: np.ndarray, t0: float, freq: float, tau: float, amplitude: float) -> np.ndarray:
    """A decaying sine starting at ``t0`` (s): an impact exciting one structural mode."""
    rel = t - t0
    out = np.zeros_like(t)
    on = rel >= 0
    out[on] = amplitude * np.exp(-rel[on] / tau) * np.sin(2 * np.pi * freq * rel[on])
    return out


def _pump_skid(rng: np.random.Generator) -> tuple[Recording, dict]:
    fs, duration = 5120.0, 20.0
    n = int(fs * duration)
    t = np.arange(n) / fs
    running, bearing = 24.6, 173.45  # Hz; both on the 0.05 Hz bin grid of a 20 s record
    full_scale = 5 * STANDARD_GRAVITY  # the invented sensors' range: +-5 g
    names = ("DE_H", "DE_V", "NDE_A")
    harmonics = {"DE_H": (1.8, 0.9, 0.35), "DE_V": (1.2, 0.6, 0.25), "NDE_A": (0.7, 1.1, 0.2)}  # m/s^2 peak
    bearing_amp = {"DE_H": 0.45, "DE_V": 0.6, "NDE_A": 0.15}
    impact_amp = {"DE_H": 18.0, "DE_V": 30.0, "NDE_A": 9.0}
    locations = {"DE_H": "drive-end bearing housing, horizontal",
                 "DE_V": "drive-end bearing housing, vertical",
                 "NDE_A": "non-drive-end bearing housing, axial"}
    noise_sos = signal.butter(4, 2000.0, fs=fs, output="sos")  # the acquisition unit's anti-alias filter
    burst = (int(6.0 * fs), int(6.3 * fs))
    dropout = (int(11.0 * fs), int(11.25 * fs))
    impact_t, impact_f, impact_tau = 14.5, 410.0, 0.02
    drift_end, drift_tau = 0.6, 8.0
    tones, channels, noise_rms, clip_runs = [], [], {}, {}
    for k, name in enumerate(names):
        x = np.zeros(n)
        for h, amp in enumerate(harmonics[name], start=1):
            x += _tone(t, h * running, amp, rng.uniform(0, 2 * np.pi))
            tones.append({"channel": name, "kind": f"{h}x running speed",
                          "frequency_hz": round(h * running, 9), "amplitude_peak": amp})
        x += _tone(t, bearing, bearing_amp[name], rng.uniform(0, 2 * np.pi))
        tones.append({"channel": name, "kind": "bearing tone", "frequency_hz": bearing,
                      "amplitude_peak": bearing_amp[name]})
        noise = signal.sosfilt(noise_sos, rng.normal(0.0, 0.08, n))
        noise_rms[name] = float(np.sqrt(np.mean(noise**2)))
        x += noise + _ringdown(t, impact_t, impact_f, impact_tau, impact_amp[name])
        if name == "NDE_A":
            x += drift_end * (1 - np.exp(-t / drift_tau))  # the sensor's bias settling after power-up
        if name == "DE_H":
            envelope = signal.windows.hann(burst[1] - burst[0])
            x[burst[0]:burst[1]] += 80.0 * envelope * np.sin(2 * np.pi * 612.0 * t[burst[0]:burst[1]])
        if name == "DE_V":
            x[dropout[0]:dropout[1]] = 0.0  # the cable connector lost contact: the input reads zero
        x = np.clip(x, -full_scale, full_scale)
        clipped = np.flatnonzero(np.abs(x) >= full_scale)
        runs = int(np.count_nonzero(np.diff(clipped) > 1)) + 1 if clipped.size else 0
        clip_runs[name] = (int(clipped[0]), int(clipped[-1]) + 1, int(clipped.size), runs) if runs else None
        channels.append(Channel(x, fs, name=name, unit="m/s^2", metadata={
            "location": locations[name], "sensor": f"invented IEPE accelerometer SK-10, s/n 7{k}31",
            "sensitivity": 10.2, "sensitivity_unit": "mV/(m/s^2)", "full_scale": full_scale}))
    recording = Recording(channels, metadata={
        "scenario": "pump_skid", "site": "Larkmoor water-treatment works (invented)",
        "machine": "raw-water pump P-3 on skid S2, 1476 rpm (invented)", "seed": _SEEDS["pump_skid"]})
    first, stop, count, runs = clip_runs["DE_H"]
    truths = {
        "tones": tones, "running_speed_hz": running, "bearing_tone_hz": bearing,
        "noise": {"description": "white Gaussian, std 0.08 m/s^2, through a 4th-order 2000 Hz Butterworth "
                  "low-pass", "rms_m_s2": noise_rms},
        "defects": [
            {"kind": "clipping", "channel": "DE_H", "start": first, "stop": stop, "clipped_samples": count,
             "clipped_runs": runs, "full_scale": full_scale, "burst_start": burst[0], "burst_stop": burst[1],
             "note": "a 612 Hz burst of 80 m/s^2 peak (Hann envelope) clipped at +-5 g"},
            {"kind": "dropout", "channel": "DE_V", "start": dropout[0], "stop": dropout[1], "value": 0.0},
            {"kind": "dc_drift", "channel": "NDE_A", "start": 0, "stop": n,
             "model": "0.6 * (1 - exp(-t / 8 s)) m/s^2",
             "value_at_end": drift_end * (1 - np.exp(-duration / drift_tau))},
            {"kind": "impact", "channel": "all", "start": int(round(impact_t * fs)),
             "stop": int(round((impact_t + 10 * impact_tau) * fs)), "ring_frequency_hz": impact_f,
             "decay_time_constant_s": impact_tau, "amplitude": impact_amp},
        ],
    }
    return recording, truths


def _floor_footfall(rng: np.random.Generator) -> tuple[Recording, dict]:
    fs, duration = 512.0, 64.0
    n = int(fs * duration)
    t = np.arange(n) / fs
    f_mode, damping, modal_mass = 7.8, 0.03, 12_000.0  # Hz, fraction of critical, kg
    pacing, weight = 1.95, 750.0  # steps/s, N
    load_factors = (0.4, 0.1, 0.06, 0.06)  # dynamic load factor of walking harmonics 1..4
    walk = (8.0, 48.0)  # s: the walker crosses the bay along its span
    on = (t >= walk[0]) & (t < walk[1])
    # Modal participation follows the first mode shape sin(pi x / L) as the walker crosses.
    participation = np.where(on, np.sin(np.pi * (t - walk[0]) / (walk[1] - walk[0])), 0.0)
    phases = rng.uniform(0, 2 * np.pi, len(load_factors))
    force = weight * participation * sum(a * np.sin(2 * np.pi * (h + 1) * pacing * t + p)
                                         for h, (a, p) in enumerate(zip(load_factors, phases)))
    omega = 2 * np.pi * f_mode
    # Modal acceleration of a single-degree-of-freedom mode: a/F = s^2 / (M (s^2 + 2 zeta w s + w^2)).
    response = signal.lsim(([1.0 / modal_mass, 0.0, 0.0], [1.0, 2 * damping * omega, omega**2]), force, t)[1]
    noise_std = 0.002
    shapes = {"FLOOR_Z_MID": 1.0, "FLOOR_Z_QTR": float(np.sin(np.pi / 4))}
    locations = {"FLOOR_Z_MID": "bay midspan, vertical", "FLOOR_Z_QTR": "quarter span, vertical"}
    channels, peaks = [], {}
    for name, shape in shapes.items():
        clean = shape * response
        peaks[name] = float(np.max(np.abs(clean)))
        channels.append(Channel(clean + rng.normal(0.0, noise_std, n), fs, name=name, unit="m/s^2", metadata={
            "location": locations[name], "sensor": "invented low-noise seismic accelerometer FL-2"}))
    recording = Recording(channels, metadata={
        "scenario": "floor_footfall", "site": "Quarry Lane offices, level 3 bay C4 (invented)",
        "test": "one walker crossing the bay at 1.95 steps/s", "seed": _SEEDS["floor_footfall"]})
    steady = load_factors[3] * weight / (modal_mass * 2 * damping)  # resonant peak of the 4th harmonic
    truths = {
        "floor_mode_hz": f_mode, "damping_ratio": damping, "modal_mass_kg": modal_mass,
        "pacing_hz": pacing, "walker_weight_n": weight, "dynamic_load_factors": list(load_factors),
        "resonant_harmonic": 4, "steady_state_resonant_peak_m_s2": steady,
        "walking": {"start": int(walk[0] * fs), "stop": int(walk[1] * fs)},
        "mode_shape_factor": shapes, "peak_response_m_s2": peaks, "noise_std_m_s2": noise_std,
        "tones": [{"channel": name, "kind": "floor mode (resonant 4th walking harmonic)",
                   "frequency_hz": f_mode} for name in shapes],
        "defects": [],
    }
    return recording, truths


def _vehicle_seat(rng: np.random.Generator) -> tuple[Recording, dict]:
    fs, duration = 500.0, 60.0
    n = int(fs * duration)
    t = np.arange(n) / fs
    # Random ride vibration: bands around body bounce (1-2.2 Hz), wheel hop (9-14 Hz) and broadband.
    bands = ((1.0, 2.2), (9.0, 14.0), (0.5, 80.0))
    weights = {"SEAT_X": (0.3, 0.4, 1.0), "SEAT_Y": (0.5, 0.2, 1.0), "SEAT_Z": (1.0, 0.7, 0.8)}
    random_rms = {"SEAT_X": 0.25, "SEAT_Y": 0.20, "SEAT_Z": 0.55}  # m/s^2 of the random part, exactly
    engine_hz, engine_amp = 27.5, 0.08
    shock_times, shock_amp, shock_freq, shock_damping = (12.4, 31.75, 47.1), (9.0, 6.0, 12.0), 4.5, 0.3
    shock_share = {"SEAT_X": 0.35, "SEAT_Y": 0.1, "SEAT_Z": 1.0}
    omega = 2 * np.pi * shock_freq
    axes = {"SEAT_X": "fore-aft", "SEAT_Y": "lateral", "SEAT_Z": "vertical"}
    channels, peaks, crest = [], {}, {}
    for name in weights:
        shaped = sum(w * signal.sosfilt(signal.butter(2, band, "bandpass", fs=fs, output="sos"),
                                        rng.standard_normal(n)) for w, band in zip(weights[name], bands))
        shaped *= random_rms[name] / np.sqrt(np.mean(shaped**2))
        x = shaped + _tone(t, engine_hz, engine_amp, rng.uniform(0, 2 * np.pi))
        for t0, amp in zip(shock_times, shock_amp):
            # A pothole: the seat's response decays like a damped mode at 4.5 Hz.
            tau = 1.0 / (shock_damping * omega)
            x += _ringdown(t, t0, shock_freq * np.sqrt(1 - shock_damping**2), tau, shock_share[name] * amp)
        peaks[name] = float(np.max(np.abs(x)))
        crest[name] = peaks[name] / float(np.sqrt(np.mean(x**2)))
        channels.append(Channel(x, fs, name=name, unit="m/s^2", metadata={
            "location": "seat pan (driver), " + axes[name],
            "sensor": "invented triaxial seat pad SP-3", "axis": name[-1].lower()}))
    recording = Recording(channels, metadata={
        "scenario": "vehicle_seat",
        "vehicle": "utility vehicle UV-40 on the Brackenhill test track (invented)",
        "seed": _SEEDS["vehicle_seat"]})
    truths = {
        "random_rms_m_s2": random_rms, "random_bands_hz": [list(b) for b in bands],
        "tones": [{"channel": name, "kind": "engine", "frequency_hz": engine_hz, "amplitude_peak": engine_amp}
                  for name in weights],
        "shock_share": shock_share, "peak_m_s2": peaks, "crest_factor_unweighted": crest,
        "events": [{"kind": "shock", "channel": "all", "start": int(round(t0 * fs)),
                    "stop": int(round((t0 + 1.0) * fs)), "time_s": t0, "amplitude_z_m_s2": amp,
                    "natural_frequency_hz": shock_freq, "damping_ratio": shock_damping}
                   for t0, amp in zip(shock_times, shock_amp)],
        "defects": [],
    }
    return recording, truths


_GENERATORS = {"pump_skid": _pump_skid, "floor_footfall": _floor_footfall, "vehicle_seat": _vehicle_seat}


@functools.lru_cache(maxsize=None)  # a Recording is immutable, so sharing one is safe
def _generate(scenario: str) -> tuple[Recording, dict]:
    check_choice(scenario, "scenario", DEMO_SCENARIOS)
    recording, truths = _GENERATORS[scenario](np.random.default_rng(_SEEDS[scenario]))
    first = recording[0]
    head = {"scenario": scenario, "description": DEMO_SCENARIOS[scenario], "seed": _SEEDS[scenario],
            "fs_hz": first.fs, "n_samples": first.n_samples, "duration_s": first.duration,
            "unit": first.unit, "channels": recording.names}
    return recording, {**head, **truths}


def demo_recording(scenario: str = "pump_skid") -> Recording:
    """Return a demo recording (the same samples on every call and machine).

    Parameters
    ----------
    scenario : str, default "pump_skid"
        One of :data:`DEMO_SCENARIOS`.

    Examples
    --------
    >>> rec = demo_recording()
    >>> rec.names, rec[0].fs, rec[0].duration
    (['DE_H', 'DE_V', 'NDE_A'], 5120.0, 20.0)
    """
    return _generate(scenario)[0]


def demo_truths(scenario: str = "pump_skid") -> dict:
    """Return the known truths of a demo scenario: tones, amplitudes, defect sample ranges.

    Sample ranges are ``start``/``stop`` indices (stop exclusive); amplitudes
    are in m/s^2 (peak unless the key says rms).

    Examples
    --------
    >>> truths = demo_truths("floor_footfall")
    >>> truths["floor_mode_hz"], truths["pacing_hz"]
    (7.8, 1.95)
    """
    return copy.deepcopy(_generate(scenario)[1])  # the caller may edit its copy


def write_demo(directory: str | os.PathLike = "sigtune-demo") -> list[Path]:
    """Write every demo scenario in every format, plus a truths JSON each.

    Files are ``<scenario>.csv`` (with a time column), ``.tsv``, ``.wav``
    (float64, with its ``.wav.json`` sidecar), ``.h5``, ``.npz`` and
    ``<scenario>.truths.json``, about 30 MB in all.

    Parameters
    ----------
    directory : str or Path, default "sigtune-demo"
        Created if missing.

    Returns
    -------
    list of Path
        Every file written.
    """
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    written = []
    for scenario in DEMO_SCENARIOS:
        recording, truths = demo_recording(scenario), demo_truths(scenario)
        for ext in _DEMO_FORMATS:
            written.append(write(recording, directory / f"{scenario}.{ext}"))
            if ext == "wav":
                written.append(sidecar_path(written[-1]))
        written.append(write_text_atomic(directory / f"{scenario}.truths.json",
                                         to_json(truths, "truths") + "\n"))
    return written
