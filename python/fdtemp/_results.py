"""Typed results over the library's JSON."""

from __future__ import annotations

import json
from dataclasses import dataclass

from . import _plot


@dataclass(frozen=True)
class Estimate:
    """A value with its confidence interval (``low``/``high`` None where there is none)."""

    estimate: float | None
    low: float | None = None
    high: float | None = None
    note: str | None = None

    @classmethod
    def of(cls, d):
        if d is None:
            return None
        return cls(d.get("estimate"), d.get("low"), d.get("high"), d.get("note"))


class _Result:
    """A result held as the library's JSON text."""

    def __init__(self, text: str):
        self._text = text
        self._dict = json.loads(text)

    def to_json(self) -> str:
        """The JSON exactly as the command line's ``--json`` writes it."""
        return self._text

    def to_dict(self) -> dict:
        """The JSON as Python objects (a fresh copy)."""
        return json.loads(self._text)

    def __getitem__(self, key):
        return self._dict[key]


class Fit:
    """One fit: all curves jointly (``tw`` None) or one curve."""

    def __init__(self, d: dict):
        self._d = d
        self.tw = d.get("tw")
        self.t = d.get("t")
        self.model = d.get("model")
        self.n_samples = d.get("n_samples")
        self.n_points = d.get("n_points")
        self.x = Estimate.of(d.get("x"))
        self.t_eff = Estimate.of(d.get("t_eff"))
        self.break_ = Estimate.of(d.get("break"))
        self.slope_above = Estimate.of(d.get("slope_above"))
        self.p_equilibrium = d.get("p_equilibrium")
        self.p_slope_minus_one = d.get("p_slope_minus_one")
        self.p_lack_of_fit = d.get("p_lack_of_fit")
        self.x_quotable = d.get("x_quotable")
        self.curve = d.get("curve")
        self.verdict = d.get("verdict")
        self.cautions = d.get("cautions", [])

    def __repr__(self):
        x = self.x
        return (f"Fit(tw={self.tw}, X={x.estimate:.4g} [{x.low:.4g}, {x.high:.4g}])"
                if x and x.estimate is not None and x.low is not None
                else f"Fit(tw={self.tw})")


class FitResult(_Result):
    """``fdtemp.fit``: X and T_eff of a campaign, jointly (``joint``) and per curve."""

    def __init__(self, text: str):
        super().__init__(text)
        d = self._dict
        self.fits = [Fit(f) for f in d.get("fits", [])]
        #: The joint fit over every curve (the first of ``fits``).
        self.joint = self.fits[0] if self.fits else None
        self.x = self.joint.x if self.joint else None
        self.t_eff = self.joint.t_eff if self.joint else None
        self.n_samples = d.get("n_samples")
        self.waiting_times = d.get("waiting_times")
        self.excluded_samples = d.get("excluded_samples", [])
        self.verdict = d.get("verdict")
        self.cautions = d.get("cautions", [])
        self.aging = d.get("aging")
        self.settings = d.get("settings")
        #: The parametric points: dicts of tw, t, x, x_se, y, y_se.
        self.points = d.get("points", [])

    def points_frame(self):
        """The parametric points as a pandas DataFrame."""
        import pandas as pd

        return pd.DataFrame(self.points)

    def plot(self, ax=None):
        """The FD plot: the parametric points per tw with their errors and each fit."""
        ax = _plot.axes(ax)
        by_tw = {}
        for p in self.points:
            by_tw.setdefault(p["tw"], []).append(p)
        per_tw = {f.tw: f for f in self.fits if f.tw is not None}
        for i, (tw, pts) in enumerate(by_tw.items()):
            color = f"C{i % 10}"
            xs = [p["x"] for p in pts]
            ys = [p["y"] for p in pts]
            ax.errorbar(xs, ys, xerr=[p["x_se"] for p in pts], yerr=[p["y_se"] for p in pts],
                        fmt="o", ms=3, color=color, label=f"tw = {tw:g}")
            f = per_tw.get(tw)
            if f is not None:
                grid = sorted(xs)
                line = _plot.curve_line(f.curve, grid)
                if line is not None:
                    ax.plot(grid, line, "-", color=color, lw=1)
        if self.joint is not None and by_tw:
            allx = sorted(p["x"] for p in self.points)
            line = _plot.curve_line(self.joint.curve, allx)
            if line is not None:
                x = self.joint.x
                lab = "joint fit" if x is None or x.estimate is None else f"joint fit, X = {x.estimate:.3g}"
                ax.plot(allx, line, "k--", lw=1, label=lab)
        normalized = (self.settings or {}).get("axes_used") == "normalized"
        ax.set_xlabel("C/C(t,t)" if normalized else "C")
        ax.set_ylabel("k·T·χ/C(t,t)" if normalized else "k·T·χ")
        ax.legend(fontsize="small")
        return ax

    def __repr__(self):
        return f"FitResult(n_samples={self.n_samples}, joint={self.joint!r})"


class ObservablesResult(_Result):
    """``fdtemp.fit`` on a table of several observables: each observable's fit (same
    samples, same resamples) and the joint test that they share one X."""

    def __init__(self, text: str):
        super().__init__(text)
        d = self._dict
        #: Observable name → its ``FitResult``, in file order.
        self.observables = {
            o.get("observable"): FitResult(json.dumps(o)) for o in d.get("observables", [])
        }
        shared = d.get("shared_ratio", {})
        #: The joint test as a dict (Wald statistic, F, df, p-value, correlation, …).
        self.shared = shared
        self.p_value = shared.get("p_value")
        #: "consistent", "differ" or "undecided".
        self.verdict = shared.get("verdict")
        self.message = shared.get("message")
        #: The common X and T_eff (estimates without numbers unless consistent).
        self.common_x = Estimate.of(shared.get("common_ratio"))
        self.common_t_eff = Estimate.of(shared.get("common_t_eff"))

    def __repr__(self):
        return (f"ObservablesResult({list(self.observables)}, verdict={self.verdict!r}, "
                f"p={self.p_value})")


class SpectrumResult(_Result):
    """``fdtemp.spectrum`` / ``fdtemp.noise`` with a dissipation: T_eff(f)."""

    def __init__(self, text: str):
        super().__init__(text)
        d = self._dict
        self.spectra = d.get("spectra", [])
        #: Every frequency: dicts of f, t_eff, low, high, psd, loss, dof.
        self.points = d.get("points", [])
        self.band = d.get("band")
        self.t_eff = Estimate.of((self.band or {}).get("t_eff"))
        self.departure = d.get("departure")
        self.cautions = d.get("cautions", [])
        self.settings = d.get("settings")

    def plot(self, ax=None):
        """T_eff(f) on log axes, with its interval where there is one, and the bath T."""
        ax = _plot.axes(ax)
        for i, s in enumerate(self.spectra):
            pts = s.get("points", [])
            f = [p["f"] for p in pts]
            label = "T_eff" if s.get("tw") is None else f"tw = {s['tw']:g}"
            ax.plot(f, [p["t_eff"] for p in pts], ".", ms=3, color=f"C{i % 10}", label=label)
            if pts and all(p.get("low") is not None for p in pts):
                ax.fill_between(f, [p["low"] for p in pts], [p["high"] for p in pts],
                                color=f"C{i % 10}", alpha=0.2, lw=0)
        temperature = (self.settings or {}).get("temperature")
        if temperature is not None:
            ax.axhline(temperature, color="k", ls="--", lw=1, label=f"T = {temperature:g}")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("f (Hz)")
        ax.set_ylabel("T_eff")
        ax.legend(fontsize="small")
        return ax


class NoiseResult:
    """``fdtemp.noise``: the Welch PSD, and T_eff(f) (``spectrum``) with a dissipation."""

    def __init__(self, json_text: str | None, psd_csv: str):
        #: The PSD as the CSV that ``--psd-out`` writes (``fdtemp.spectrum`` reads it back).
        self.psd_csv = psd_csv
        #: T_eff(f), or None without a dissipation.
        self.spectrum = SpectrumResult(json_text) if json_text is not None else None

    def psd_frame(self):
        """The PSD table as a pandas DataFrame."""
        import io

        import pandas as pd

        return pd.read_csv(io.StringIO(self.psd_csv), comment="#")

    def to_json(self):
        return self.spectrum.to_json() if self.spectrum else None

    def to_dict(self):
        return self.spectrum.to_dict() if self.spectrum else None

    def plot(self, ax=None):
        if self.spectrum is None:
            raise ValueError("T_eff(f) needs a dissipation: give resistance= or loss_file=")
        return self.spectrum.plot(ax)


class SynthResult:
    """``fdtemp.synth``: the simulated data file's bytes and its truth."""

    def __init__(self, data: bytes, truth_json: str):
        #: The data file exactly as ``fdtemp synth --out`` writes it.
        self.data = bytes(data)
        self._truth = truth_json
        #: What the analysis should find.
        self.truth = json.loads(truth_json)

    def truth_json(self) -> str:
        """The truth file exactly as ``fdtemp synth`` writes it (STEM.truth.json)."""
        return self._truth

    def to_dict(self) -> dict:
        return json.loads(self._truth)

    def to_frame(self):
        """The data as a pandas DataFrame."""
        import io

        import pandas as pd

        return pd.read_csv(io.BytesIO(self.data))

    def write(self, out, overwrite: bool = False):
        """Writes the data to ``out`` and the truth beside it as STEM.truth.json."""
        from pathlib import Path

        out = Path(out)
        truth = out.with_suffix(".truth.json")
        for p in (out, truth):
            if p.exists() and not overwrite:
                raise FileExistsError(f"{p} exists; give overwrite=True to replace it")
        out.write_bytes(self.data)
        truth.write_text(self._truth)
        return out, truth


class ReduceResult(_Result):
    """``fdtemp.reduce``: the reduction's JSON (``to_dict()`` equals ``reduce --json``), its
    report in words, and the files ``--out`` and ``--table`` write."""

    def __init__(self, json_text: str, text: str, out: bytes, table: bytes | None):
        super().__init__(json_text)
        d = self._dict
        #: "twins" or "quenches".
        self.protocol = d["protocol"]
        #: The report in words, as ``fdtemp reduce`` prints it.
        self.text = text
        #: The ``--out`` file's bytes: the campaign ``fit`` reads (twins), or the
        #: per-point C and chi with intervals (quenches).
        self.out = bytes(out)
        #: The ``--table`` file's bytes (twins), else None.
        self.table = None if table is None else bytes(table)
        #: The linear-response test (twins with two levels or more), else None.
        self.linearity = d.get("linearity")
        self.cautions = d.get("cautions", [])
        #: Repeated quenches fitted with ``temperature=``: the fits (all tw first, then one
        #: per tw), each with ``x``, ``t_eff``, ``q`` (``Estimate``), else None.
        fit = d.get("fit")
        self.quench_fit = None if fit is None else [
            dict(f, x=Estimate.of(f["x"]), t_eff=Estimate.of(f["t_eff"]),
                 q=Estimate.of(f["q"])) for f in fit["fits"]]

    def __repr__(self):
        return f"ReduceResult({self.protocol}, {self['n_points']} points)"

    def out_frame(self):
        """The ``--out`` table as a pandas DataFrame."""
        return _frame(self.out)

    def table_frame(self):
        """The per-point table (twin runs; quenches with several fields at a tw) as a pandas
        DataFrame (None for quenches with one field per tw)."""
        return None if self.table is None else _frame(self.table)

    def fit(self, *, temperature, **options):
        """``fdtemp.fit`` of the reduced campaign (twin runs only)."""
        if self.protocol != "twins":
            raise ValueError("fit needs a campaign of samples: repeated quenches give "
                             "pointwise C and chi; call fdtemp.reduce(..., temperature=T) for "
                             "the direct fit on their replicates (docs/reduce.md)")
        from ._api import fit

        return fit(self.out, temperature=temperature, **options)

    def write(self, out, table=None, overwrite: bool = False):
        """Writes the ``--out`` file (and the ``--table`` file when asked for)."""
        from pathlib import Path

        files = [(Path(out), self.out)] if out is not None else []
        if table is not None:
            if self.table is None:
                raise ValueError("table is for twin runs and quenches with several fields at "
                                 "a tw; for these quenches out is already the per-point table")
            files.append((Path(table), self.table))
        for p, _ in files:
            if p.exists() and not overwrite:
                raise FileExistsError(f"{p} exists; give overwrite=True to replace it")
        for p, b in files:
            p.write_bytes(b)
        return [p for p, _ in files]


def _frame(data: bytes):
    import io

    import pandas as pd

    from ._api import exact_floats

    return pd.read_csv(io.BytesIO(data), **exact_floats(pd))
