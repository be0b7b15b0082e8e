"""fdtemp: fluctuation–dissipation ratios and effective temperatures of aging systems.

The analysis is the fdtemp library's, called through a thin native layer: every result's
``to_dict()`` is the JSON that the command line writes with ``--json`` for the same data,
options and seed (``to_json()`` is that text itself). See docs/python.md.
"""

from __future__ import annotations

from ._errors import AnalysisError, FdtempError, FileError, InputError, SettingError
from ._results import (Estimate, Fit, FitResult, NoiseResult, ObservablesResult, ReduceResult,
                       SpectrumResult, SynthResult)
from ._api import demo_campaign, demo_files, fit, noise, reduce, spectrum, synth

__all__ = [
    "fit", "spectrum", "noise", "reduce", "synth", "demo_campaign", "demo_files",
    "FitResult", "Fit", "SpectrumResult", "NoiseResult", "ReduceResult", "SynthResult",
    "Estimate", "ObservablesResult",
    "FdtempError", "InputError", "SettingError", "AnalysisError", "FileError",
]

from ._native import __version__  # noqa: E402
