"""fdtemp.fit from a path, a DataFrame and arrays, against the CLI's JSON and the truth."""

import json
import os

import numpy as np
import pytest

import fdtemp
from fdtemp._api import exact_floats

pd = pytest.importorskip("pandas", reason="pandas is needed for DataFrame input")


def test_path_matches_cli_json_byte_for_byte(two_baths, monkeypatch):
    d, truth = two_baths
    monkeypatch.chdir(d)
    r = fdtemp.fit("tb.csv", temperature=1, resamples=200)
    cli_text = (d / "tb.json").read_text()
    assert r.to_json() == cli_text
    assert r.to_dict() == json.loads(cli_text)
    assert json.dumps(r.to_dict(), indent=2, ensure_ascii=False) + "\n" == cli_text
    # The known answer: X = T_fast/T_slow = 0.4 within the joint fit's interval.
    x = r.joint.x
    assert truth["ratio"] == pytest.approx(0.4)
    assert x.low < truth["ratio"] < x.high
    assert x.estimate == pytest.approx(0.4, abs=0.05)
    assert r.t_eff.low < truth["t_eff"] < r.t_eff.high
    assert [f.tw for f in r.fits] == [None, 50.0, 500.0]
    assert r.n_samples == 40


def test_options_match_cli(two_baths, cli, monkeypatch):
    d, _ = two_baths
    monkeypatch.chdir(d)
    cli("fit", "tb.csv", "-T", 1, "-B", 100, "--seed", 7, "--model", "free", "--level",
        0.9, "--interval", "percentile", "--range", "0.1:0.99", "--json", "free.json",
        "--overwrite", cwd=d)
    r = fdtemp.fit("tb.csv", temperature=1, resamples=100, seed=7, model="free", level=0.9,
                   interval="percentile", range=(0.1, 0.99))
    assert r.to_json() == (d / "free.json").read_text()
    assert r.joint.model == "free"


def _without_input(d):
    d = dict(d)
    d.pop("input")
    return d


def test_dataframe_matches_cli_on_the_same_table(two_baths, cli, tmp_path):
    d, truth = two_baths
    df = pd.read_csv(d / "tb.csv", **exact_floats(pd))
    r = fdtemp.fit(df, temperature=1, resamples=200)
    assert r["input"] == "<DataFrame>"
    df.to_csv(tmp_path / "df.csv", index=False)
    cli("fit", tmp_path / "df.csv", "-T", 1, "-B", 200, "--json", tmp_path / "df.json")
    expected = json.loads((tmp_path / "df.json").read_text())
    assert _without_input(r.to_dict()) == _without_input(expected)
    # The same numbers as the file itself.
    from_file = json.loads((d / "tb.json").read_text())
    assert r.joint.x.estimate == from_file["fits"][0]["x"]["estimate"]
    assert r.joint.x.low < truth["ratio"] < r.joint.x.high


def _arrays(df):
    samples = list(dict.fromkeys(df["sample"]))
    pts = list(dict.fromkeys(zip(df["tw"], df["t"])))
    idx = {p: j for j, p in enumerate(pts)}
    out = {k: np.full((len(samples), len(pts)), np.nan) for k in ("corr", "resp", "corr_eq")}
    si = {s: i for i, s in enumerate(samples)}
    for row in df.itertuples():
        i, j = si[row.sample], idx[(row.tw, row.t)]
        out["corr"][i, j], out["resp"][i, j], out["corr_eq"][i, j] = row.corr, row.resp, row.corr_eq
    out["tw"] = np.array([p[0] for p in pts])
    out["t"] = np.array([p[1] for p in pts])
    return out


def test_arrays_match_cli_on_the_same_npz(two_baths, cli, tmp_path):
    d, truth = two_baths
    df = pd.read_csv(d / "tb.csv", **exact_floats(pd))
    a = _arrays(df)
    r = fdtemp.fit(temperature=1, resamples=200, **a)
    assert r["input"] == "<arrays>"
    np.savez(tmp_path / "tb.npz", **a)
    cli("fit", tmp_path / "tb.npz", "-T", 1, "-B", 200, "--json", tmp_path / "npz.json")
    expected = json.loads((tmp_path / "npz.json").read_text())
    assert _without_input(r.to_dict()) == _without_input(expected)
    assert r.joint.x.low < truth["ratio"] < r.joint.x.high
    # A dict of arrays is the same input.
    assert fdtemp.fit(a, temperature=1, resamples=200).to_json() == r.to_json()
    # The same campaign as the table (sample names aside, the numbers agree).
    from_table = json.loads((d / "tb.json").read_text())
    assert r.joint.x.estimate == pytest.approx(from_table["fits"][0]["x"]["estimate"], rel=1e-9)


def test_drop_incomplete_lists_the_sample(two_baths):
    d, _ = two_baths
    df = pd.read_csv(d / "tb.csv", **exact_floats(pd))
    df = df.drop(index=[3])
    with pytest.raises(fdtemp.InputError, match="--drop-incomplete"):
        fdtemp.fit(df, temperature=1, resamples=100)
    r = fdtemp.fit(df, temperature=1, resamples=100, drop_incomplete=True)
    assert [e["sample"] for e in r.excluded_samples] == ["run0001"]
    assert r.n_samples == 39


def test_demo_campaign_from_a_dataframe():
    df, truth = fdtemp.demo_campaign()
    assert set(df.columns) >= {"sample", "tw", "t", "corr", "resp"}
    r = fdtemp.fit(df, temperature=truth["temperature"], resamples=300)
    x = r.joint.x
    assert x.low < truth["ratio"] < x.high
    assert r.joint.break_.low < truth["break"] < r.joint.break_.high


def test_progress_and_threads_do_not_change_the_result(two_baths, capfd):
    d, _ = two_baths
    a = fdtemp.fit(os.fspath(d / "tb.csv"), temperature=1, resamples=100, threads=1)
    b = fdtemp.fit(d / "tb.csv", temperature=1, resamples=100, threads=2, progress=True)
    assert a.to_json() == b.to_json()
    assert "resampling" in capfd.readouterr().err


def test_limit_matches_cli(cli, tmp_path, monkeypatch):
    # An invented campaign at 3 waiting times; the long-age limit as `fit --limit`.
    cli("synth", "two-lines", "--quick", "--samples", 20, "--out", "tl.csv", cwd=tmp_path)
    cli("fit", "tl.csv", "-T", 0.6, "-B", 200, "--limit", "--json", "lim.json",
        cwd=tmp_path)
    monkeypatch.chdir(tmp_path)
    r = fdtemp.fit("tl.csv", temperature=0.6, resamples=200, limit=True)
    assert r.to_json() == (tmp_path / "lim.json").read_text()
    limit = r.to_dict()["age_limit"]
    assert limit["x_inf"]["estimate"] is not None
    assert len(limit["points"]) == 16


def test_observables_give_the_joint_test_as_the_cli(tmp_path, cli, monkeypatch):
    # Two observables of the two-bath system sharing X = 0.4 (exact for independent
    # Ornstein-Uhlenbeck modes, common practice).
    s = fdtemp.synth("two-baths-observables", samples=24, seed=3, quick=True)
    s.write(tmp_path / "obs.csv")
    monkeypatch.chdir(tmp_path)
    r = fdtemp.fit("obs.csv", temperature=1.0, resamples=299)
    assert isinstance(r, fdtemp.ObservablesResult)
    assert list(r.observables) == ["a", "b"]
    cli("fit", "obs.csv", "-T", 1, "-B", 299, "--json", "r.json", cwd=tmp_path)
    assert r.to_json() == (tmp_path / "r.json").read_text()
    assert r.verdict in ("consistent", "differ")
    assert 0.0 <= r.p_value <= 1.0
    one = fdtemp.fit("obs.csv", temperature=1.0, resamples=299, observable="b")
    assert isinstance(one, fdtemp.FitResult)
    assert one["observable"] == "b"
    assert one.x.estimate == r.observables["b"].x.estimate
