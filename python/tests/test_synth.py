"""synth gives the CLI's files byte for byte."""

import fdtemp


def test_synth_matches_cli(tmp_path, cli):
    cli("synth", "brownian", "--quick", "--samples", 5, "--seed", 2, "--out", "b.csv",
        cwd=tmp_path)
    s = fdtemp.synth("brownian", samples=5, seed=2, quick=True)
    assert s.data == (tmp_path / "b.csv").read_bytes()
    assert s.truth_json() == (tmp_path / "b.truth.json").read_text()
    assert s.truth["scenario"] == "brownian"
    s.write(tmp_path / "c.csv")
    assert (tmp_path / "c.truth.json").read_text() == s.truth_json()
