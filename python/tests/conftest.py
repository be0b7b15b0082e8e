"""Shared fixtures: the command-line binary the results are compared with."""

import json
import os
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def cli():
    """Runs the built fdtemp binary (FDTEMP_CLI, else target/release/fdtemp) and returns
    the completed process; skips when it is not built."""
    exe = Path(os.environ.get("FDTEMP_CLI", ROOT / "target" / "release" / "fdtemp"))
    if not exe.exists():
        pytest.skip(f"the CLI is not built at {exe} (cargo build --release at the root)")

    def run(*args, cwd=None, check=True):
        p = subprocess.run([str(exe), *map(str, args)], cwd=cwd, capture_output=True,
                           text=True)
        if check and p.returncode != 0:
            raise AssertionError(f"fdtemp {' '.join(map(str, args))} failed: {p.stderr}")
        return p

    return run


@pytest.fixture(scope="session")
def two_baths(tmp_path_factory, cli):
    """A simulated two-bath campaign (X = 0.4) written by the CLI, and its CLI fit JSON."""
    d = tmp_path_factory.mktemp("two_baths")
    cli("synth", "two-baths", "--quick", "--samples", 40, "--seed", 3, "--out", "tb.csv",
        cwd=d)
    cli("fit", "tb.csv", "-T", 1, "-B", 200, "--json", "tb.json", cwd=d)
    return d, json.loads((d / "tb.truth.json").read_text())
