"""The entry points: data in any of its forms, options named as the command line's."""

from __future__ import annotations

import os

import numpy as np

from . import _native
from ._errors import SettingError, call
from ._results import (FitResult, NoiseResult, ObservablesResult, ReduceResult, SpectrumResult,
                       SynthResult)


def exact_floats(pd):
    """read_csv's option for numbers read back exactly (the default from pandas 3 on)."""
    return {"float_precision": "round_trip"} if int(pd.__version__.split(".")[0]) < 3 else {}


def _frame_text(data):
    """The CSV text of a pandas or polars DataFrame, or None for anything else."""
    mod = type(data).__module__.split(".")[0]
    if mod == "pandas" and hasattr(data, "to_csv"):
        return data.to_csv(index=False).encode()
    if mod == "polars" and hasattr(data, "write_csv"):
        return data.write_csv().encode()
    return None


def _table(data, name, expected):
    """(label, path, text) of a table given as a path, CSV bytes or a DataFrame."""
    if isinstance(data, (str, os.PathLike)):
        return os.fspath(data), os.fspath(data), None
    if isinstance(data, (bytes, bytearray)):
        return "<bytes>", None, bytes(data)
    text = _frame_text(data)
    if text is None:
        raise TypeError(f"{name}() data is a {type(data).__name__}; expected a path, "
                        + expected)
    return "<DataFrame>", None, text


def _band(v, name):
    if v is None:
        return None
    if isinstance(v, str):
        a, sep, b = v.partition(":")
        if not sep:
            raise SettingError(f"--{name} is '{v}', expected MIN:MAX",
                               f"--{name} is '{v}', expected MIN:MAX")
        return (float(a), float(b))
    a, b = v
    return (float(a), float(b))


def _campaign(data, arrays):
    """(label, path, text, arrays) for the native fit."""
    if data is None:
        given = {k: v for k, v in arrays.items() if v is not None}
        if not given:
            raise TypeError("fit() needs data: a path, a DataFrame, or corr=, resp=, tw=, t=")
        data = given
    if isinstance(data, (str, os.PathLike)):
        return (os.fspath(data), os.fspath(data), None, None)
    if isinstance(data, (bytes, bytearray)):
        return ("<bytes>", None, bytes(data), None)
    text = _frame_text(data)
    if text is not None:
        return ("<DataFrame>", None, text, None)
    if hasattr(data, "keys"):
        a = {k: np.ascontiguousarray(np.asarray(v, dtype=np.float64)) for k, v in data.items()}
        return ("<arrays>", None, None, a)
    raise TypeError(f"fit() data is a {type(data).__name__}; expected a path, a pandas or "
                    "polars DataFrame, or a dict of arrays corr, resp, tw, t")


def fit(data=None, *, temperature, corr=None, resp=None, tw=None, t=None, corr_eq=None,
        sample=None, units="reduced", axes="auto", model="broken", smooth_shape=None,
        weights="inverse-variance", resamples=2000, seed=1, level=0.95, interval="bca",
        min_branch=5, hold="tw", range=None, column=(), delimiter="comma",
        drop_incomplete=False, calibrate=None, sim_noise="gaussian", overlap=None,
        threads=None, progress=False, limit=False, settled_within=0.05,
        two_time=None, observable=None) -> FitResult | ObservablesResult:
    """X and T_eff of a campaign, as ``fdtemp fit`` (options as its long options).

    ``data``: a file path (tidy CSV or .npz), a pandas/polars DataFrame with the tidy
    columns (sample, tw, t, corr, resp [, corr_eq]), or a dict of arrays; or give the
    arrays as ``corr=``, ``resp=`` (samples × points), ``tw=``, ``t=`` (one per point)
    [, ``corr_eq=``, ``sample=``]. ``column`` maps roles to names, e.g.
    ``column=["resp=chi_zfc"]``; ``range`` is (CMIN, CMAX) or "CMIN:CMAX".
    ``limit=True`` adds the long-age limit (``--limit``); ``two_time=3`` or ``5`` the
    two-time ratio X(t,tw) with that many waiting times per local fit (``--two-time
    --two-time-window N``).

    A table with an ``observable`` column and several observables gives an
    ``ObservablesResult``: every observable's ``FitResult`` and the joint test that they
    share one X; ``observable="NAME"`` fits that one alone (``--observable``).
    """
    label, path, text, arrs = _campaign(
        data, dict(corr=corr, resp=resp, tw=tw, t=t, corr_eq=corr_eq, sample=sample))
    if isinstance(column, str):
        column = [column]
    text_out = call(
        _native.fit, label, path, text, arrs, float(temperature), units, axes, model,
        smooth_shape, weights, int(resamples), int(seed), float(level), interval,
        int(min_branch), hold, _band(range, "range"), list(column), delimiter,
        bool(drop_incomplete), calibrate, sim_noise,
        None if overlap is None else os.fspath(overlap), threads, bool(progress),
        bool(limit), float(settled_within),
        None if two_time is None else int(two_time),
        None if observable is None else str(observable))
    if '"shared_ratio"' in text_out:
        return ObservablesResult(text_out)
    return FitResult(text_out)


def spectrum(data, *, temperature, convention=None, window=None, units="si",
             delimiter="comma", errors="auto", dof=None, band=None, bands_per_decade=5,
             level=0.95, resamples=2000, seed=1, interval="bca",
             threads=None) -> SpectrumResult:
    """T_eff(f) from a PSD table, as ``fdtemp spectrum`` (a path or a DataFrame with
    columns f, psd, loss [, dof, run, tw])."""
    label, path, text = _table(data, "spectrum", "or a DataFrame with columns f, psd, loss")
    return SpectrumResult(call(
        _native.spectrum, label, path, text, float(temperature), convention, window, units,
        delimiter, errors, dof, _band(band, "band"), int(bands_per_decade), float(level),
        int(resamples), int(seed), interval, threads))


def noise(data, *, sample_rate=None, gain=None, segment=4096, overlap=None,
          resistance=None, loss_file=None, temperature=None, convention=None, units="si",
          delimiter="comma", errors="auto", dof=None, band=None, bands_per_decade=5,
          level=0.95, resamples=2000, seed=1, interval="bca", threads=None, ages=None,
          age_span=None, age_window=None, quench_at=0.0,
          intermittency=False) -> NoiseResult:
    """Welch PSD of noise records and, with ``resistance=`` or ``loss_file=``, T_eff(f), as
    ``fdtemp noise``. ``data``: a path, or a NumPy array (one run, or runs × samples).

    ``ages=[tw, ...]`` (with ``age_span=`` or ``age_window=``, ``quench_at=``): records
    after a quench, T_eff(f, tw) per age (``--ages``; the result's PSD CSV is empty).
    ``intermittency=True``: the test against Gaussian surrogates (``--intermittency``; per
    age with ``ages=``); both need ``data`` as a path."""
    if isinstance(data, (str, os.PathLike)):
        label, path, array = os.fspath(data), os.fspath(data), None
    else:
        label, path = "<array>", None
        array = np.ascontiguousarray(np.asarray(data, dtype=np.float64))
    json_text, psd = call(
        _native.noise, label, path, array, sample_rate, gain, int(segment), overlap,
        resistance, None if loss_file is None else os.fspath(loss_file), temperature,
        convention, units, delimiter, errors, dof, _band(band, "band"),
        int(bands_per_decade), float(level), int(resamples), int(seed), interval, threads,
        [] if ages is None else [float(a) for a in np.atleast_1d(ages)],
        None if age_span is None else float(age_span),
        None if age_window is None else float(age_window), float(quench_at),
        bool(intermittency))
    return NoiseResult(json_text, psd)


def reduce(data, *, protocol="auto", combine="extrapolate", resamples=1999, seed=1,
           level=0.95, plain=False, tw=None, temperature=None, min_branch=5, out=None,
           table=None, overwrite=False, threads=None) -> ReduceResult:
    """Raw runs to C and chi, as ``fdtemp reduce`` (options as its long options).

    ``data``: a path, a pandas/polars DataFrame or a CSV table's bytes, with the columns
    ``sample, tw, t, h, corr, m`` (twin runs) or ``run, t, value, h, tw`` (repeated
    quenches). ``out``/``table`` write the files ``--out``/``--table`` write. For
    repeated quenches, ``temperature=`` adds the direct fit of X on the stratified
    replicates (``reduce --fit -T``; the result's ``quench_fit``); twin runs give a
    campaign: ``result.fit(temperature=…)``.
    """
    label, path, text = _table(data, "reduce", "a DataFrame or a CSV table's bytes")
    tws = [] if tw is None else [float(v) for v in np.atleast_1d(tw)]
    result = ReduceResult(*call(
        _native.reduce, label, path, text, protocol, combine, int(resamples), int(seed),
        float(level), bool(plain), tws, None if temperature is None else float(temperature),
        int(min_branch), threads))
    if out is not None or table is not None:
        result.write(out, table=table, overwrite=overwrite)
    return result


def synth(scenario, *, samples=200, seed=1, quick=False, hold="tw", out=None,
          overwrite=False, threads=None) -> SynthResult:
    """A simulated system with a known answer, as ``fdtemp synth`` (``out`` writes the
    data file and STEM.truth.json as it does; ``hold="t"`` for ``ising-chain`` at fixed
    later times)."""
    data, truth = call(_native.synth, scenario, int(samples), int(seed), bool(quick), threads,
                       hold)
    result = SynthResult(data, truth)
    if out is not None:
        result.write(out, overwrite=overwrite)
    return result


def demo_campaign():
    """The demo's invented campaign (the ``campaign.csv`` that ``fdtemp demo`` writes) as a
    pandas DataFrame, and its truth as a dict (X = 0.45, T_eff = 4/3 at T = 0.6)."""
    import io
    import json

    import pandas as pd

    campaign, truth, _ = call(_native.demo_inputs)
    frame = pd.read_csv(io.BytesIO(bytes(campaign)), **exact_floats(pd))
    return frame, json.loads(bytes(truth))


def demo_files(folder):
    """Writes the demo's inputs (campaign.csv, truth.json, spectrum.csv) into ``folder``
    as ``fdtemp demo`` does; returns their paths."""
    from pathlib import Path

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    paths = [folder / n for n in ("campaign.csv", "truth.json", "spectrum.csv")]
    for p, b in zip(paths, call(_native.demo_inputs)):
        p.write_bytes(bytes(b))
    return paths
