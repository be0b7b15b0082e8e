"""Figures with matplotlib, when it is installed."""

import pytest

import fdtemp

mpl = pytest.importorskip("matplotlib", reason="matplotlib is not installed (optional)")
mpl.use("Agg")


def test_fd_plot_draws_points_and_fits(two_baths):
    import matplotlib.pyplot as plt

    d, _ = two_baths
    r = fdtemp.fit(d / "tb.csv", temperature=1, resamples=100)
    ax = r.plot()
    # One errorbar set per tw, one fitted line per tw, and the joint fit.
    assert len(ax.containers) == 2
    assert len(ax.lines) >= 2 + 1
    legend = " ".join(t.get_text() for t in ax.get_legend().get_texts())
    assert "joint fit, X = 0.4" in legend or "joint fit, X = 0.39" in legend
    fig, ax2 = plt.subplots()
    assert r.plot(ax=ax2) is ax2
    plt.close("all")


def test_teff_plot(tmp_path, cli):
    import matplotlib.pyplot as plt

    cli("synth", "resistor", "--quick", "--samples", 3, "--out", "r.csv", cwd=tmp_path)
    r = fdtemp.noise(tmp_path / "r.csv", sample_rate=10000, resistance=1000,
                     temperature=300, resamples=100)
    ax = r.plot()
    assert ax.get_xscale() == "log"
    assert any(line.get_ydata()[0] == 300 for line in ax.lines)
    plt.close("all")
