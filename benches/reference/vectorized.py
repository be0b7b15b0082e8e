"""The vectorized reference: resampling as a count-matrix product in chunks, and every
candidate break of every resample at once by prefix sums (closed-form optimum inside
each interval, as fdtemp). Run: python3 vectorized.py FILE --resamples B"""
import numpy as np

import common


def fit_all(x, z, w, _unused):
    """Rows of x, z (replicates x points); returns X, q, SSE(no break) - SSE per row."""
    r = x.shape[0]
    order = np.argsort(x, axis=1, kind="stable")
    xs = np.take_along_axis(x, order, 1)
    zs = np.take_along_axis(z, order, 1)
    ws = w[order]
    sw = ws.sum(1, keepdims=True)
    xm = (ws * xs).sum(1, keepdims=True) / sw
    zm = (ws * zs).sum(1, keepdims=True) / sw
    dx, dz = xs - xm, zs - zm
    srr = (ws * dz * dz).sum(1)
    s_w = np.cumsum(ws, 1)
    s_x = np.cumsum(ws * dx, 1)
    s_xx = np.cumsum(ws * dx * dx, 1)
    s_r = np.cumsum(ws * dz, 1)
    s_xr = np.cumsum(ws * dx * dz, 1)
    al, be = s_r, s_xr
    ga = s_w - s_w * s_w / sw
    de = s_x - s_w * s_x / sw
    ep = s_xx - s_x * s_x / sw
    p = x.shape[1]
    k = np.arange(1, p + 1)
    valid = (k >= common.MIN_BRANCH) & (k <= p - common.MIN_BRANCH)
    hi = np.concatenate([dx[:, 1:], dx[:, -1:]], 1)
    lo = dx
    with np.errstate(divide="ignore", invalid="ignore"):
        d = be * ga - al * de
        qs = (be * de - al * ep) / d
        inside = (qs > lo) & (qs < hi) & valid[None, :]
        def sse(q):
            den = ga * q * q - 2 * de * q + ep
            num = al * q - be
            out = srr[:, None] - num * num / den
            return np.where(den > 1e-12 * (ws * dx * dx).sum(1, keepdims=True), np.maximum(out, 0), np.inf)
        e_hi = np.where(valid[None, :], sse(hi), np.inf)
        e_st = np.where(inside, sse(qs), np.inf)
    both = np.concatenate([e_hi, e_st], 1)
    j = np.argmin(both, 1)
    col = j % p
    qc = np.where(j < p, hi[np.arange(r), col], qs[np.arange(r), col])
    num = al[np.arange(r), col] * qc - be[np.arange(r), col]
    den = ga[np.arange(r), col] * qc * qc - 2 * de[np.arange(r), col] * qc + ep[np.arange(r), col]
    c = num / den
    best = both[np.arange(r), j]
    return 1 + c, qc + xm[:, 0], srr - best


if __name__ == "__main__":
    common.main(fit_all, "vectorized")
