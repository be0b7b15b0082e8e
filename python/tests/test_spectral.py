"""noise and spectrum against the CLI's JSON, and T_eff of a resistor at its temperature."""

import json

import numpy as np
import pytest

import fdtemp
from fdtemp._api import exact_floats


@pytest.fixture(scope="module")
def resistor(tmp_path_factory, cli):
    d = tmp_path_factory.mktemp("resistor")
    cli("synth", "resistor", "--quick", "--samples", 4, "--out", "r.csv", cwd=d)
    cli("noise", "r.csv", "--sample-rate", 10000, "--resistance", 1000, "-T", 300, "-B", 200,
        "--json", "r.json", "--psd-out", "r.psd.csv", cwd=d)
    return d


def test_noise_path_matches_cli(resistor, monkeypatch):
    monkeypatch.chdir(resistor)
    r = fdtemp.noise("r.csv", sample_rate=10000, resistance=1000, temperature=300,
                     resamples=200)
    assert r.to_json() == (resistor / "r.json").read_text()
    assert r.psd_csv == (resistor / "r.psd.csv").read_text()
    t = r.spectrum.t_eff
    assert t.low < 300 < t.high
    assert t.estimate == pytest.approx(300, rel=0.1)


def test_noise_array_gives_the_same_numbers(resistor):
    a = np.loadtxt(resistor / "r.csv", delimiter=",", skiprows=1).T  # runs × samples
    r = fdtemp.noise(a, sample_rate=10000, resistance=1000, temperature=300, resamples=200)
    expected = json.loads((resistor / "r.json").read_text())
    got = r.to_dict()
    assert got["input"] == "<array>"
    assert got["band"]["t_eff"]["estimate"] == pytest.approx(
        expected["band"]["t_eff"]["estimate"], rel=1e-12)
    assert len(got["points"]) == len(expected["points"])
    psd_only = fdtemp.noise(a[0], sample_rate=10000)
    assert psd_only.spectrum is None and psd_only.to_dict() is None
    assert psd_only.psd_csv.count("\n") > 10


def test_spectrum_matches_cli(resistor, cli, monkeypatch):
    monkeypatch.chdir(resistor)
    cli("spectrum", "r.psd.csv", "-T", 300, "--band", "100:4000", "--convention", "voltage",
        "--json", "s.json",
        cwd=resistor)
    r = fdtemp.spectrum("r.psd.csv", temperature=300, band="100:4000", convention="voltage")
    assert r.to_json() == (resistor / "s.json").read_text()
    assert r.t_eff.low < 300 < r.t_eff.high


def test_spectrum_from_a_dataframe(resistor):
    pd = pytest.importorskip("pandas", reason="pandas is needed for DataFrame input")
    df = pd.read_csv(resistor / "r.psd.csv", comment="#", **exact_floats(pd))
    r = fdtemp.spectrum(df, temperature=300, band=(100, 4000), convention="voltage")
    assert r["input"] == "<DataFrame>"
    assert r.t_eff.low < 300 < r.t_eff.high


def test_noise_ages_and_intermittency_match_the_cli(tmp_path, cli, monkeypatch):
    # Invented aging records (synth aging-noise) and Johnson-noise records (synth
    # resistor): the Python calls give the command line's JSON byte for byte.
    cli("synth", "aging-noise", "--quick", "--samples", 12, "--out", "ag.csv", cwd=tmp_path)
    cli("noise", "ag.csv", "--ages", "50,200", "--age-span", 0.5, "--loss-file",
        "ag.loss.csv", "-T", 1, "--units", "reduced", "--convention", "loss", "--segment",
        512, "-B", 200, "--json", "ag.json", cwd=tmp_path)
    monkeypatch.chdir(tmp_path)
    r = fdtemp.noise("ag.csv", ages=[50, 200], age_span=0.5, loss_file="ag.loss.csv",
                     temperature=1, units="reduced", convention="loss", segment=512,
                     resamples=200)
    assert r.to_json() == (tmp_path / "ag.json").read_text()
    assert [s["tw"] for s in r.to_dict()["spectra"]] == [50.0, 200.0]
    cli("synth", "resistor", "--quick", "--samples", 4, "--out", "res.csv", cwd=tmp_path)
    cli("noise", "res.csv", "--sample-rate", 10000, "--resistance", 1000, "--intermittency",
        "--segment", 1024, "-B", 200, "--json", "res.json", cwd=tmp_path)
    s = fdtemp.noise("res.csv", sample_rate=10000, resistance=1000, intermittency=True,
                     segment=1024, resamples=200)
    assert s.to_json() == (tmp_path / "res.json").read_text()
    assert s.to_dict()["intermittency"]["verdict"] in ("consistent_with_gaussian", "intermittent")
