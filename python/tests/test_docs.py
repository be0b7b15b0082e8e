"""The example in docs/python.md runs as written."""

import re
from pathlib import Path

import pytest

DOC = Path(__file__).resolve().parents[2] / "docs" / "python.md"


def test_python_md_example_runs(tmp_path, monkeypatch):
    pytest.importorskip("pandas", reason="the example reads a DataFrame")
    mpl = pytest.importorskip("matplotlib", reason="the example plots")
    mpl.use("Agg")
    blocks = re.findall(r"```python\n(.*?)```", DOC.read_text(), re.S)
    assert blocks, "docs/python.md has no python code block"
    monkeypatch.chdir(tmp_path)
    scope = {}
    for b in blocks:
        exec(compile(b, str(DOC), "exec"), scope)
    assert (tmp_path / "fd-plot.png").stat().st_size > 1000
