"""Errors are exceptions with the CLI's message and location."""

import pytest

import fdtemp

pd = pytest.importorskip("pandas", reason="pandas is needed for DataFrame input")

BAD = "sample,tw,t,corr,resp\na,1,2,0.5,0.1\na,1,3,oops,0.2\nb,1,2,0.5,0.1\nb,1,3,0.4,0.2\n"


def test_input_error_has_the_cli_message_and_location(tmp_path, cli, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "bad.csv").write_text(BAD)
    p = cli("fit", "bad.csv", "-T", 1, check=False, cwd=tmp_path)
    assert p.returncode == 2
    with pytest.raises(fdtemp.InputError) as e:
        fdtemp.fit("bad.csv", temperature=1)
    err = e.value
    assert isinstance(err, ValueError)
    assert p.stderr.strip() == f"error: {err}"
    assert (err.file, err.line, err.column) == ("bad.csv", 3, 4)
    assert err.location == "bad.csv:3:4"
    assert str(err) == f"bad.csv:3:4: {err.message}"
    assert "oops" in err.message


def test_dataframe_errors_name_the_row_as_a_table_line():
    df = pd.DataFrame({"sample": ["a", "a", "b", "b"], "tw": [1.0, 1.0, 1.0, 1.0],
                       "t": [2.0, 0.5, 2.0, 3.0], "corr": [0.5] * 4, "resp": [0.1] * 4})
    with pytest.raises(fdtemp.InputError) as e:
        fdtemp.fit(df, temperature=1)
    assert e.value.file == "<DataFrame>"
    assert (e.value.line, e.value.column) == (3, 3)  # header is line 1: row 1 is line 3
    assert "expected t > tw" in e.value.message


def test_missing_column_and_bad_arrays():
    df = pd.DataFrame({"sample": ["a"], "tw": [1.0], "t": [2.0], "corr": [0.5]})
    with pytest.raises(fdtemp.InputError, match="resp"):
        fdtemp.fit(df, temperature=1)
    with pytest.raises(fdtemp.InputError, match="corr"):
        fdtemp.fit(corr=[[1.0, 2.0]], resp=[[1.0], [2.0]], tw=[1.0, 1.0], t=[2.0, 3.0],
                   temperature=1)


def test_settings_errors(two_baths):
    d, _ = two_baths
    with pytest.raises(fdtemp.SettingError, match="--model is 'bent', expected one of broken"):
        fdtemp.fit(d / "tb.csv", temperature=1, model="bent")
    with pytest.raises(fdtemp.SettingError, match="level"):
        fdtemp.fit(d / "tb.csv", temperature=1, level=1.5)
    with pytest.raises(fdtemp.FileError):
        fdtemp.fit(d / "absent.csv", temperature=1)
    with pytest.raises(fdtemp.SettingError):
        fdtemp.synth("two-baths", samples=1)
