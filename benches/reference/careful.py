"""The careful reference: the estimator of common.py as a skilled numpy user would write it
today. Polars reads the tidy CSV; one integer sort and a reshape in numpy give the
samples x points matrices; each chunk of resamples (1024 by default) is one BLAS product
W D (multinomial counts over samples times the per-sample columns); the break searches
(data and null model, the joint fit and every waiting time at once when the waiting times
have equal grids) are batches of 64 resamples through prefix sums with the closed-form
optimum inside each interval, no Python loop over single resamples. The batches run in
threads (numpy's loops let go of the GIL) once each product is done, not beside BLAS's
own threads; on 2 cores this measured faster than one thread, than batches of 256 and
than a small product per batch.

Run: python3 careful.py FILE --resamples B [--interval percentile] [--skip-floors]
Same arguments and output as the other references, plus `floors` (unless --skip-floors):
the time of reading the CSV alone with polars and of one B x n by n x columns product.
Needs polars and numpy: pip install polars numpy.
"""
import json
import os
import sys
import time
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import polars as pl

import common

COLUMNS = ["sample", "tw", "t", "corr", "resp"]
# Resamples per fit batch: big enough for numpy's per-call cost, small enough for the cache.
PIECE = 64

def read_campaign(path):
    """Polars read, numpy sort; the grid (tw per point) and samples x points arrays of corr
    and resp, samples in the order of their names (as common.read_campaign)."""
    df = pl.read_csv(path, comment_prefix="#", columns=COLUMNS)
    s = df["sample"]
    names = s.unique().sort()
    # Codes in name order (an Enum of the sorted names): sorting integers is much quicker.
    code = s.to_numpy() if s.dtype.is_numeric() else s.cast(pl.Enum(names)).to_physical().to_numpy()
    tw, t = df["tw"].to_numpy(), df["t"].to_numpy()
    order = np.lexsort((t, tw, code))
    n = len(names)
    if len(df) % n:
        sys.exit("samples have different numbers of points")
    p = len(df) // n
    tw, t = tw[order].reshape(n, p), t[order].reshape(n, p)
    if (tw != tw[0]).any() or (t != t[0]).any():
        sys.exit("samples have different (tw, t) grids")
    if ((tw[0, 1:] == tw[0, :-1]) & (t[0, 1:] == t[0, :-1])).any():
        sys.exit("repeated (sample, tw, t) rows")
    return tw[0], df["corr"].to_numpy()[order].reshape(n, p), df["resp"].to_numpy()[order].reshape(n, p)


def fit(x, z, w):
    """Broken sticks of every row: x (..., m) parametric points, z (k, ..., m) k series on
    the same x (the data, the null-shifted data), w (..., m) weights broadcast to x.
    Returns X, q and SSE(no break) - SSE, each (k, ...)."""
    # Quicksort: where two points tie in x the break between them is empty, so the order
    # among ties does not change the fit.
    order = np.argsort(x, axis=-1)
    xs = np.take_along_axis(x, order, -1)
    ws = np.take_along_axis(np.broadcast_to(w, x.shape), order, -1)
    zs = np.take_along_axis(z, order[None], -1)
    sw = ws.sum(-1, keepdims=True)
    xm = (ws * xs).sum(-1, keepdims=True) / sw
    zm = (ws * zs).sum(-1, keepdims=True) / sw
    dx, dz = xs - xm, zs - zm
    wdx = ws * dx
    srr = (ws * dz * dz).sum(-1)
    s_w, s_x, s_xx = np.cumsum(ws, -1), np.cumsum(wdx, -1), np.cumsum(wdx * dx, -1)
    al, be = np.cumsum(ws * dz, -1), np.cumsum(wdx * dz, -1)
    ga = s_w - s_w * s_w / sw
    de = s_x - s_w * s_x / sw
    ep = s_xx - s_x * s_x / sw
    m = x.shape[-1]
    k = np.arange(1, m + 1)
    valid = (k >= common.MIN_BRANCH) & (k <= m - common.MIN_BRANCH)
    hi = np.concatenate([dx[..., 1:], dx[..., -1:]], -1)
    tiny = 1e-12 * (wdx * dx).sum(-1, keepdims=True)

    def sse(q, ok):
        den = ga * q * q - 2 * de * q + ep
        num = al * q - be
        return np.where(ok & (den > tiny), np.maximum(srr[..., None] - num * num / den, 0), np.inf)

    with np.errstate(divide="ignore", invalid="ignore"):
        qs = (be * de - al * ep) / (be * ga - al * de)
        e_hi = sse(hi, valid)  # the break at the next point up
        e_st = sse(qs, (qs > dx) & (qs < hi) & valid)  # the optimum inside the interval
    # The first smallest of [e_hi, e_st], as one argmin over both would pick it.
    j_hi, j_st = e_hi.argmin(-1)[..., None], e_st.argmin(-1)[..., None]
    b_hi, b_st = np.take_along_axis(e_hi, j_hi, -1), np.take_along_axis(e_st, j_st, -1)
    st = b_st < b_hi
    j = np.where(st, j_st, j_hi)
    at = lambda a: np.take_along_axis(np.broadcast_to(a, zs.shape), j, -1)
    qc = np.where(st, at(qs), at(hi))
    c = (at(al) * qc - at(be)) / (at(ga) * qc * qc - 2 * at(de) * qc + at(ep))
    best = np.where(st, b_st, b_hi)
    return (1 + c)[..., 0], (qc + xm)[..., 0], srr - best[..., 0]


def blocks(gs):
    """The groups as fit batches (columns, number of groups, points per group): the joint
    fit, then the waiting times together if their grids are equal-sized and contiguous."""
    per_tw = gs[1:]
    cols = np.concatenate(per_tw)
    if len({len(i) for i in per_tw}) == 1 and (cols == np.arange(len(cols))).all():
        return [(gs[0], 1, len(gs[0])), (cols, len(per_tw), len(per_tw[0]))]
    return [(i, 1, len(i)) for i in gs]


def fit_blocks(x, z, w, bl, zh=None):
    """Fits of the rows of x, z (r, p) in every block: X, q, d as (k, r, groups); k = 1, or
    k = 2 given zh: then also z moved onto each group's no-break model of zh (the null)."""
    out = []
    for cols, g, m in bl:
        shape = (x.shape[0], g, m)
        wb, zb = w[cols].reshape(g, m), z[:, cols].reshape(shape)
        zk = zb[None]
        if zh is not None:
            h = zh[cols].reshape(g, m)
            zk = np.stack([zb, zb - (h - (wb * h).sum(-1, keepdims=True) / wb.sum(-1, keepdims=True))])
        out.append(fit(x[:, cols].reshape(shape), zk, wb))
    return [np.concatenate(v, -1) for v in zip(*out)]


def floors(path, n, data, b):
    t = time.perf_counter()
    pl.read_csv(path, comment_prefix="#", columns=COLUMNS)
    t_read = time.perf_counter() - t
    counts = np.random.default_rng(0).multinomial(n, np.full(n, 1.0 / n), size=b) / n
    t = time.perf_counter()
    counts @ data
    t_product = time.perf_counter() - t
    # The same product with one more column per point, the second moments that weights
    # re-estimated inside every resample need (fdtemp's estimator; this one keeps the
    # full-data weights and does not need them).
    p = data.shape[1] // 2
    wide = np.hstack([data, data[:, :p] ** 2])
    t = time.perf_counter()
    counts @ wide
    return {"polars_read_seconds": t_read, "numpy_product_seconds": t_product,
            "numpy_product_with_moments_seconds": time.perf_counter() - t}


def main():
    ap = common.arguments()
    ap.add_argument("--skip-floors", action="store_true", help="do not time the read and product floors")
    ap.add_argument("--threads", type=int, default=os.cpu_count(), help="fit batches run at once")
    ap.set_defaults(chunk=1024)  # resamples per BLAS product; the fits go PIECE at a time
    args = ap.parse_args()
    t0 = time.perf_counter()
    tw, corr, resp = read_campaign(args.file)
    t_read = time.perf_counter() - t0
    n, p = corr.shape
    kt = args.temperature
    w = common.weights(corr, resp, kt)
    data = np.hstack([corr, kt * resp])
    mean = data.mean(0)
    xh, zh = mean[:p], mean[:p] + mean[p:]
    gs = common.groups(tw)
    bl = blocks(gs)
    est_x, est_q, est_d = (v[0, 0] for v in fit_blocks(xh[None], zh[None], w, bl))
    rng = np.random.default_rng(args.seed)
    sizes = [min(args.chunk, args.resamples - i) for i in range(0, args.resamples, args.chunk)]

    def fits(m):
        X, _, d = fit_blocks(m[:, :p], m[:, :p] + m[:, p:], w, bl, zh)
        return X[0], d[1]

    t1 = time.perf_counter()
    reps, nulls = [], []
    with ThreadPoolExecutor(args.threads) as pool:
        for b in sizes:
            m = (rng.multinomial(n, np.full(n, 1.0 / n), size=b) / n) @ data
            for X, d in pool.map(fits, np.array_split(m, -(-b // PIECE))):
                reps.append(X)
                nulls.append(d)
    t_resample = time.perf_counter() - t1
    reps, nulls = np.concatenate(reps), np.concatenate(nulls)
    t2 = time.perf_counter()
    jack = None
    if args.interval == "bca":
        loo = (mean[None, :] * n - data) / (n - 1)
        if args.jackknife_limit:
            loo = loo[: args.jackknife_limit]
        jack = np.concatenate([fit_blocks(c[:, :p], c[:, :p] + c[:, p:], w, bl)[0][0]
                               for c in np.array_split(loo, -(-len(loo) // PIECE))])
    t_jack = time.perf_counter() - t2
    results = []
    for g, idx in enumerate(gs):
        r = reps[:, g]
        lo, hi = common.percentile(r) if jack is None else common.bca(est_x[g], r, jack[:, g])
        pval = (1 + np.sum(nulls[:, g] >= est_d[g])) / (len(nulls) + 1)
        results.append({"tw": None if g == 0 else float(tw[idx[0]]), "ratio": float(est_x[g]), "low": lo,
                        "high": hi, "break": float(est_q[g]), "equilibrium_p": float(pval)})
    elapsed = time.perf_counter() - t0
    parts = {"read": t_read, "resamples": t_resample, "jackknife": t_jack,
             "jackknife_fits": 0 if jack is None else len(jack), "samples": int(n),
             "resamples_done": args.resamples, "interval": args.interval}
    out = {"reference": "careful", "seconds": elapsed, "parts": parts, "fits": results}
    if not args.skip_floors:
        out["floors"] = floors(args.file, n, data, args.resamples)
    json.dump(out, sys.stdout, indent=1)
    print()


if __name__ == "__main__":
    main()
