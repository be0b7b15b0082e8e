"""reduce gives the CLI's JSON and files byte for byte, from a path or a DataFrame."""

import json

import pytest

import fdtemp

pd = pytest.importorskip("pandas", reason="pandas is needed for DataFrame input")


@pytest.fixture(scope="module")
def raw(tmp_path_factory, cli):
    """Raw twin runs and repeated quenches of the two-bath system, written by the CLI."""
    d = tmp_path_factory.mktemp("raw")
    cli("synth", "two-baths-twins", "--quick", "--samples", 12, "--seed", 4, "--out",
        "twins.csv", cwd=d)
    cli("synth", "two-baths-quenches", "--quick", "--samples", 40, "--seed", 5, "--out",
        "quenches.csv", cwd=d)
    return d


def test_twins_match_the_cli(raw, cli):
    src = raw / "twins.csv"
    cli("reduce", src, "--out", "c.csv", "--table", "p.csv", "--json", "r.json", "-B", 199,
        cwd=raw)
    r = fdtemp.reduce(src, resamples=199)
    assert r.protocol == "twins"
    assert r.to_json() == (raw / "r.json").read_text()
    assert r.out == (raw / "c.csv").read_bytes()
    assert r.table == (raw / "p.csv").read_bytes()
    assert r.linearity is not None and r.linearity["rejects"] is False
    assert r.out_frame().shape[0] == 12 * r["n_points"]
    # The reduced campaign fits as the file does.
    cli("fit", "c.csv", "-T", 1, "-B", 200, "--json", "f.json", cwd=raw)
    f = r.fit(temperature=1, resamples=200)
    want = json.loads((raw / "f.json").read_text())
    assert f.to_dict()["fits"][0]["x"] == want["fits"][0]["x"]


def test_a_dataframe_reduces_as_its_file(raw):
    src = raw / "twins.csv"
    a = fdtemp.reduce(src, resamples=100).to_dict()
    b = fdtemp.reduce(pd.read_csv(src), resamples=100).to_dict()
    assert b.pop("input") == "<DataFrame>"
    a.pop("input")
    assert a == b
    with pytest.raises(fdtemp.SettingError, match="repeated quenches"):
        fdtemp.reduce(src, temperature=1)


def test_quenches_match_the_cli(raw, cli, tmp_path):
    src = raw / "quenches.csv"
    cli("reduce", src, "--out", tmp_path / "q.csv", "--json", tmp_path / "q.json", "-B", 100)
    r = fdtemp.reduce(src, resamples=100)
    assert r.protocol == "quenches"
    assert r.to_json() == (tmp_path / "q.json").read_text()
    assert r.out == (tmp_path / "q.csv").read_bytes()
    assert r.table is None
    assert "pointwise_only" in [c["code"] for c in r.cautions]
    with pytest.raises(ValueError, match="pointwise"):
        r.fit(temperature=1)
    assert r.quench_fit is None
    cli("reduce", src, "--out", tmp_path / "f.csv", "--json", tmp_path / "f.json", "-B", 100,
        "--fit", "-T", 1)
    fitted = fdtemp.reduce(src, resamples=100, temperature=1)
    assert fitted.to_json() == (tmp_path / "f.json").read_text()
    assert fitted.quench_fit[0]["tw"] is None and fitted.quench_fit[0]["x"].low is not None
    written = r.write(tmp_path / "again.csv")
    assert written[0].read_bytes() == r.out
    with pytest.raises(FileExistsError):
        r.write(tmp_path / "again.csv")


def test_reduce_errors_have_the_cli_location(tmp_path, cli):
    bad = tmp_path / "bad.csv"
    bad.write_text("sample,tw,t,h,corr,m\na,1,2,0,0.5,0.1\na,1,2,0.1,x,0.2\n")
    p = cli("reduce", bad, "--out", tmp_path / "o.csv", check=False)
    assert p.returncode == 2
    with pytest.raises(fdtemp.InputError) as e:
        fdtemp.reduce(bad)
    assert p.stderr.strip() == f"error: {e.value}"
    assert e.value.line == 3
    with pytest.raises(fdtemp.InputError, match="neither twin runs"):
        fdtemp.reduce(pd.DataFrame({"a": [1], "b": [2]}))
