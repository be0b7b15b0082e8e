"""The straightforward reference: for each resample and each group, one weighted
least-squares solve per candidate break (at the data points), then a bounded 1-D
refinement of q in the two intervals next to the best candidate.
Run: python3 straightforward.py FILE --resamples B (slow: use a small B and scale)."""
import numpy as np
from scipy.optimize import minimize_scalar

import common


def sse_at(x, z, sw, q):
    h = np.maximum(q - x, 0.0)
    a = np.column_stack([np.ones_like(x), h]) * sw[:, None]
    coef, *_ = np.linalg.lstsq(a, z * sw, rcond=None)
    res = (z - coef[0] - coef[1] * h) * sw
    return float(res @ res), coef


def fit_one(x, z, w):
    sw = np.sqrt(w)
    xs = np.sort(x)
    p = len(x)
    cands = range(common.MIN_BRANCH, p - common.MIN_BRANCH + 1)
    best = min(cands, key=lambda k: sse_at(x, z, sw, xs[k] if k < p else xs[-1])[0])
    lo, hi = xs[max(best - 1, common.MIN_BRANCH - 1)], xs[min(best + 1, p - 1)]
    res = minimize_scalar(lambda q: sse_at(x, z, sw, q)[0], bounds=(lo, hi), method="bounded",
                          options={"xatol": 1e-10})
    q = res.x if res.fun <= sse_at(x, z, sw, xs[best])[0] else xs[best]
    e, coef = sse_at(x, z, sw, q)
    null = float((((z - np.sum(w * z) / np.sum(w)) * sw) ** 2).sum())
    return 1 + coef[1], q, null - e


def fit_all(x, z, w, _unused):
    out = np.array([fit_one(x[i], z[i], w) for i in range(x.shape[0])])
    return out[:, 0], out[:, 1], out[:, 2]


if __name__ == "__main__":
    common.main(fit_all, "straightforward")
