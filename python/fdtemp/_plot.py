"""Figures with matplotlib (an optional dependency)."""

from __future__ import annotations


def axes(ax):
    """The axes to draw on: ``ax``, or a new figure's."""
    if ax is not None:
        return ax
    try:
        import matplotlib.pyplot as plt
    except ImportError as e:  # pragma: no cover - depends on the environment
        raise ImportError(
            "plotting needs matplotlib: pip install matplotlib "
            "(or pip install './python[plot]')"
        ) from e
    _, ax = plt.subplots()
    return ax


def curve_line(curve: dict, xs):
    """The fitted y at each x of ``curve`` (broken stick, or one line), None otherwise."""
    if curve is None:
        return None
    if "q" in curve and "slope_above" in curve and "slope_below" in curve:
        q, b = curve["q"], curve["intercept"]
        yq = b + curve["slope_above"] * q
        return [b + curve["slope_above"] * x if x >= q else yq + curve["slope_below"] * (x - q)
                for x in xs]
    if "slope" in curve and "intercept" in curve:
        return [curve["intercept"] + curve["slope"] * x for x in xs]
    return None
