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

from . import advice, analysis, campaign, conditioning, demo, evaluation, filters, io, motion, quality
from . import resample, session, spectra, steps, units, weighting
from ._version import __version__
from .advice import *  # noqa: F403
from .analysis import *  # noqa: F403
from .campaign import *  # noqa: F403
from .channel import Channel, Recording
from .conditioning import *  # noqa: F403
from .errors import SigtuneError, SigtuneWarning
from .evaluation import *  # noqa: F403
from .filters import *  # noqa: F403
from .io import *  # noqa: F403
from .motion import *  # noqa: F403
from .quality import *  # noqa: F403
from .resample import *  # noqa: F403
from .session import *  # noqa: F403
from .spectra import *  # noqa: F403
from .steps import *  # noqa: F403
from .units import *  # noqa: F403
from .weighting import *  # noqa: F403

__all__ = sorted(
    {"__version__", "Channel", "Recording", "SigtuneError", "SigtuneWarning"}
    | set(advice.__all__) | set(analysis.__all__) | set(campaign.__all__) | set(conditioning.__all__)
    | set(evaluation.__all__) | set(filters.__all__) | set(io.__all__) | set(motion.__all__)
    | set(quality.__all__) | set(resample.__all__) | set(session.__all__) | set(spectra.__all__)
    | set(steps.__all__) | set(units.__all__) | set(weighting.__all__)
)
