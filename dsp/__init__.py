"""sigtune's signal-processing core: a plain numpy/scipy library.

The app, the batch runner, scripts and notebooks all call it the same way.
It never imports a UI library.

Data
    Channel, Recording            samples with rate (Hz), unit, quantity and history
    read, write                   recording files (CSV/TSV, WAV, HDF5, NPZ)
    convert_units, calibrate_volts, UNITS, QUANTITIES
Steps (each is data: ``to_dict()`` / ``step_from_dict``; ``apply(channel)``)
    Chain, Step, step_from_dict
    Gain, Calibrate, ConvertUnit, Detrend, Crop
    Filter, Resample, Integrate, Differentiate, Weighting
Analysis
    psd, asd, linear_spectrum, spectrogram, band_levels, band_rms, find_peaks
    alias_frequency, alias_table, oversampling_ratio, sinc_interpolate
Motion and quality
    integrate, differentiate, compare_integration, audit, advise
Evaluation (guidance only: the governing standard and competent professionals decide)
    weighting_filter, whole_body, hand_arm, severity_zone, machine_severity, building_ppv
Sessions and campaigns
    Session, run_batch
Errors
    SigtuneError (a ValueError), SigtuneWarning
"""

from . import advice, analysis, bands, blocks, campaign, conditioning, demo, evaluation, filters, io, motion
from . import quality, resample, session, severity, spectra, steps, units, weighting, windows

# Captured before the star imports below, which rebind some names (``resample`` the function
# shadows ``resample`` the module inside this namespace).
_PUBLIC_MODULES = (advice, analysis, bands, blocks, campaign, conditioning, demo, evaluation, filters, io, motion,
                   quality, resample, session, severity, spectra, steps, units, weighting, windows)

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
from .resample import *  # noqa: E402,F403
from .session import *  # noqa: E402,F403
from .severity import *  # noqa: E402,F403
from .spectra import *  # noqa: E402,F403
from .steps import *  # noqa: E402,F403
from .units import *  # noqa: E402,F403
from .weighting import *  # noqa: E402,F403
from .windows import *  # noqa: E402,F403

__all__ = sorted({"__version__", "Channel", "Recording", "SigtuneError", "SigtuneWarning"}
                 .union(*(m.__all__ for m in _PUBLIC_MODULES)))
