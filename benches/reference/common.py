"""Shared parts of the two reference implementations of fdtemp's time-domain estimator.

The estimator (what `fdtemp fit FILE -T T` computes by default): parametric points
x = mean C, y = k T mean chi per (tw, t); weights 1 / var(x + y) from the sample spread;
broken stick z = y + x = c0 - (1 - X) max(q - x, 0) fitted by weighted least squares with
the break q free, jointly and per waiting time; B bootstrap resamples of whole samples;
BCa intervals for X (jackknife acceleration; --interval percentile skips the jackknife);
the equilibrium p-value from the resamples moved onto the no-break model.

Needs: python3 with numpy and pandas (pip install numpy scipy pandas; scipy for straightforward.py).
"""
import json
import sys
import time
from statistics import NormalDist

import numpy as np

MIN_BRANCH = 5


def read_campaign(path):
    """Pandas read; returns the grid (tw per point) and samples x points arrays."""
    import pandas as pd
    df = pd.read_csv(path, comment="#")
    df = df.sort_values(["sample", "tw", "t"])
    corr = df.pivot_table(index="sample", columns=["tw", "t"], values="corr").to_numpy()
    resp = df.pivot_table(index="sample", columns=["tw", "t"], values="resp").to_numpy()
    cols = df.pivot_table(index="sample", columns=["tw", "t"], values="corr").columns
    tw = np.array([c[0] for c in cols])
    return tw, corr, resp


def weights(corr, resp, kt):
    n = corr.shape[0]
    x, y = corr, kt * resp
    vx = x.var(axis=0, ddof=1) / n
    vy = y.var(axis=0, ddof=1) / n
    cxy = ((x - x.mean(0)) * (y - y.mean(0))).sum(0) / (n - 1) / n
    v = vx + vy + 2 * cxy
    floor = 1e-6 * np.median(v[v > 0])
    return 1.0 / np.maximum(v, floor)


def groups(tw):
    out = [np.arange(len(tw))]
    for t in np.unique(tw):
        out.append(np.flatnonzero(tw == t))
    return out


def bca(estimate, reps, jack, level=0.95):
    norm = NormalDist()  # the standard library's: importing scipy.stats costs ~1 s
    reps = np.sort(reps[np.isfinite(reps)])
    frac = np.mean(reps < estimate)
    a_lo, a_hi = (1 - level) / 2, (1 + level) / 2
    if frac <= 0 or frac >= 1:
        return float(np.quantile(reps, a_lo)), float(np.quantile(reps, a_hi))
    z0 = norm.inv_cdf(frac)
    d = jack.mean() - jack
    acc = (d ** 3).sum() / (6 * ((d ** 2).sum()) ** 1.5) if (d ** 2).sum() > 0 else 0.0
    def adj(p):
        z = norm.inv_cdf(p)
        return norm.cdf(z0 + (z0 + z) / (1 - acc * (z0 + z)))
    return float(np.quantile(reps, adj(a_lo))), float(np.quantile(reps, adj(a_hi)))


def arguments():
    """The command line shared by the references (careful.py adds to it)."""
    import argparse
    ap = argparse.ArgumentParser()
    ap.add_argument("file")
    ap.add_argument("--temperature", type=float, default=0.6)
    ap.add_argument("--resamples", type=int, default=2000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--chunk", type=int, default=256)
    ap.add_argument("--jackknife-limit", type=int, default=0,
                    help="time only this many leave-one-out fits (0: all); for extrapolation")
    ap.add_argument("--interval", choices=["bca", "percentile"], default="bca")
    return ap


def percentile(reps, level=0.95):
    reps = reps[np.isfinite(reps)]
    return tuple(float(v) for v in np.quantile(reps, [(1 - level) / 2, (1 + level) / 2]))


def main(fit_all, label):
    """fit_all(x_rows, z_rows, w, idx) -> (X, q, sse_null - sse) arrays over rows."""
    args = arguments().parse_args()
    t0 = time.perf_counter()
    tw, corr, resp = read_campaign(args.file)
    t_read = time.perf_counter() - t0
    n, p = corr.shape
    kt = args.temperature
    w = weights(corr, resp, kt)
    data = np.hstack([corr, kt * resp])
    mean = data.mean(0)
    xh, yh = mean[:p], mean[p:]
    zh = xh + yh
    gs = groups(tw)
    rng = np.random.default_rng(args.seed)
    results = []
    est = [fit_all(xh[None, idx], zh[None, idx], w[idx], None) for idx in gs]
    # Null model per group: z on its weighted mean.
    shift = []
    for idx in gs:
        c0 = np.sum(w[idx] * zh[idx]) / np.sum(w[idx])
        shift.append(zh[idx] - c0)
    reps = [[] for _ in gs]
    nulls = [[] for _ in gs]
    t1 = time.perf_counter()
    done = 0
    while done < args.resamples:
        b = min(args.chunk, args.resamples - done)
        counts = rng.multinomial(n, np.full(n, 1.0 / n), size=b) / n
        m = counts @ data
        xs, zs = m[:, :p], m[:, :p] + m[:, p:]
        for g, idx in enumerate(gs):
            xg, zg = xs[:, idx], zs[:, idx]
            X, q, _ = fit_all(xg, zg, w[idx], None)
            _, _, d = fit_all(xg, zg - shift[g][None, :], w[idx], None)
            reps[g].append(X)
            nulls[g].append(d)
        done += b
    t_resample = time.perf_counter() - t1
    loo = (mean[None, :] * n - data) / (n - 1)
    if args.interval == "percentile":
        loo = loo[:0]
    elif args.jackknife_limit:
        loo = loo[: args.jackknife_limit]
    t2 = time.perf_counter()
    jacks = [fit_all(loo[:, idx], loo[:, idx] + loo[:, p + idx], w[idx], None)[0] if len(loo) else None
             for idx in gs]
    t_jack = time.perf_counter() - t2
    for g, idx in enumerate(gs):
        X0, q0, d0 = (v[0] for v in est[g])
        xr = np.concatenate(reps[g])
        dn = np.concatenate(nulls[g])
        lo, hi = percentile(xr) if args.interval == "percentile" else bca(X0, xr, jacks[g])
        pval = (1 + np.sum(dn >= d0)) / (len(dn) + 1)
        results.append({"tw": None if g == 0 else float(tw[idx[0]]), "ratio": X0, "low": lo, "high": hi,
                        "break": q0, "equilibrium_p": float(pval)})
    elapsed = time.perf_counter() - t0
    parts = {"read": t_read, "resamples": t_resample, "jackknife": t_jack,
             "jackknife_fits": int(loo.shape[0]), "samples": int(n), "resamples_done": args.resamples}
    json.dump({"reference": label, "seconds": elapsed, "parts": parts, "fits": results}, sys.stdout, indent=1)
    print()
