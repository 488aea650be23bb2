"""sigtune's signal-processing core: a plain numpy/scipy library.

The app, the batch runner, scripts and notebooks all call it the same way.
It never imports a UI library. Every function takes rates in Hz and times in
s, and every channel carries its unit; bad input raises SigtuneError with a
message that says where the problem is and what would be valid.

Data
    Channel, Recording            samples with rate (Hz), unit, quantity and history
    read, write, FORMATS          recording files (CSV/TSV, WAV, HDF5, NPZ): docs/formats.md
    convert_units, calibrate_volts, sensitivity_factor, UNITS, QUANTITIES
    demo_recording, write_demo    the invented demo scenarios: docs/demo.md
Steps (each is data: ``to_dict()`` / ``step_from_dict``; ``apply(channel)``)
    Chain, Step, step_from_dict, register_step
    Gain, Calibrate, ConvertUnit, Detrend, Crop
    Filter (design report, responses, edge_zones), Resample, Integrate, Differentiate, Weighting
Conditioning and aliasing
    resample, resample_plan, alias_frequency, alias_table, oversampling_ratio, alias_risk,
    sinc_interpolate
Spectra and bands
    psd, asd, linear_spectrum, spectrogram, find_peaks, window_properties
    band_levels, band_rms, iec_bands   (IEC 61260-1 octave and one-third-octave bands)
Motion and quality
    integrate, differentiate, compare_integration, INTEGRATION_PRESETS
    audit, check_timebase, split_valid_segments, reverse_arrangements_test, advise
Evaluation (guidance only: the governing standard and competent professionals decide)
    weighting_filter, whole_body, hand_arm, daily_exposure, severity_zone, machine_severity,
    building_ppv, CAUTIONS
Sessions, summaries and campaigns
    Session, AnalysisSettings, analyse, run_in_blocks, run_batch
Errors
    SigtuneError (a ValueError), SigtuneWarning
"""

from . import advice, analysis, bands, blocks, campaign, conditioning, demo, evaluation, filters, io, motion
from . import quality, resampling, session, severity, spectra, steps, units, weighting, windows

# The modules whose ``__all__`` make up the public face (captured before the star imports below).
_PUBLIC_MODULES = (advice, analysis, bands, blocks, campaign, conditioning, demo, evaluation, filters, io, motion,
                   quality, resampling, session, severity, spectra, steps, units, weighting, windows)

from ._version import __version__  # noqa: E402
from .advice import *  # noqa: E402,F403
from .analysis import *  # noqa: E402,F403
from .bands import *  # noqa: E402,F403
from .blocks import *  # noqa: E402,F403
from .campaign import *  # noqa: E402,F403
from .channel import Channel, Recording  # noqa: E402
from .conditioning import *  # noqa: E402,F403
from .demo import *  # noqa: E402,F403
from .errors import SigtuneError, SigtuneWarning  # noqa: E402
from .evaluation import *  # noqa: E402,F403
from .filters import *  # noqa: E402,F403
from .io import *  # noqa: E402,F403
from .motion import *  # noqa: E402,F403
from .quality import *  # noqa: E402,F403
from .resampling import *  # noqa: E402,F403
from .session import *  # noqa: E402,F403
from .severity import *  # noqa: E402,F403
from .spectra import *  # noqa: E402,F403
from .steps import *  # noqa: E402,F403
from .units import *  # noqa: E402,F403
from .weighting import *  # noqa: E402,F403
from .windows import *  # noqa: E402,F403

__all__ = sorted({"__version__", "Channel", "Recording", "SigtuneError", "SigtuneWarning"}
                 .union(*(m.__all__ for m in _PUBLIC_MODULES)))
