#!/usr/bin/env python3
"""Side-by-side timings of fdtemp and the Python references (issue workloads W1–W3).

    pip install polars numpy scipy pandas   # the references need these; fdtemp does not
    python3 benches/compare.py [--work DIR] [--only W3]
    FDTEMP_BIN=/path/to/target/release/fdtemp python3 benches/compare.py   # a built binary

W1: fit, 1000 samples x 1200 points (12 waiting times x 100 times), B = 2,000,
    percentile intervals.
W3: 100 samples on the same grid, B = 2,000, BCa (the everyday case).
W2: noise on a 10^8-sample text record (generated here, ~1.4 GB), 2^16-point segments,
    against the time to read and parse the same file's numbers alone.

Times are whole processes (reading the CSV included), median of 3 runs for fdtemp, the
careful reference (polars, BLAS, batched prefix sums) and the vectorized one. The
straightforward reference is too slow to run whole at these sizes: its resample cost is
timed on a few resamples and its jackknife on a few leave-one-out fits, then scaled
linearly (stated in the output). Floors: the careful reference's own timings of reading
the CSV alone with polars and of one B x n by n x columns product on numpy's BLAS, also
with the one moment column per point that fdtemp's re-estimated weights add (the fair
floor of its estimator); and fdtemp's own (examples/product_floor). Before timing, the estimates of X and q are compared.
With FDTEMP_BIN set, nothing is built and the floor examples are looked for beside it.
"""
import argparse
import json
import os
import statistics
import subprocess
import sys
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.environ.get("FDTEMP_BIN", os.path.join(ROOT, "target", "release", "fdtemp"))
EXAMPLES = os.path.join(os.path.dirname(BIN), "examples")
FLOOR = os.path.join(EXAMPLES, "product_floor")
REF = os.path.join(ROOT, "benches", "reference")


def run(cmd, capture=True):
    t = time.perf_counter()
    p = subprocess.run(cmd, capture_output=capture, text=True, check=True)
    return time.perf_counter() - t, p.stdout


def peak_rss(cmd):
    p = subprocess.run(["/usr/bin/time", "-f", "%M"] + cmd, capture_output=True, text=True, check=True)
    return int(p.stderr.strip().splitlines()[-1]) / 1024.0


def median_time(cmd, n=3):
    return statistics.median(run(cmd)[0] for _ in range(n))


def fdtemp_fit(path, b, interval, json_out):
    return [BIN, "fit", path, "-T", "0.6", "-B", str(b), "--interval", interval, "--json", json_out, "--overwrite"]


def reference(name, path, b, interval, *extra):
    return [sys.executable, os.path.join(REF, name), path, "--resamples", str(b), "--interval", interval, *extra]


def timed_reference(cmd, n=3):
    """Median whole-process time of n runs and the last run's output."""
    runs = [run(cmd) for _ in range(n)]
    return statistics.median(t for t, _ in runs), json.loads(runs[-1][1])


def worst(fd, ref, key, field):
    """The largest relative difference of one estimate between fdtemp and a reference."""
    pairs = [(a[key]["estimate"], c[field]) for a, c in zip(fd, ref["fits"]) if a[key]["estimate"] is not None]
    return max(abs(u - v) / abs(u) for u, v in pairs)


def workload(name, path, b, interval, work):
    print(f"\n== {name}: {os.path.basename(path)}, B = {b}, {interval} intervals")
    out = os.path.join(work, f"{name}.json")
    t_fd = median_time(fdtemp_fit(path, b, interval, out))
    rss = peak_rss(fdtemp_fit(path, b, interval, out))
    fd = json.load(open(out))["fits"]
    t_car, _ = timed_reference(reference("careful.py", path, b, interval, "--skip-floors"))
    _, car = run(reference("careful.py", path, b, interval))
    car = json.loads(car)
    t_vec, vec = timed_reference(reference("vectorized.py", path, b, interval))
    small_b = 4
    _, st = timed_reference(reference("straightforward.py", path, small_b, interval, "--jackknife-limit", "5"), n=1)
    p = st["parts"]
    t_st = p["read"] + p["resamples"] / small_b * b
    if p["jackknife_fits"]:
        t_st += p["jackknife"] / p["jackknife_fits"] * p["samples"]
    agree = {r["reference"]: (worst(fd, r, "x", "ratio"), worst(fd, r, "break", "break")) for r in (car, vec, st)}
    print("estimates agree with fdtemp (largest relative difference over the joint and per-tw fits):")
    for label, (dx, dq) in agree.items():
        print(f"    {label:16s} X {dx:.1e}   q {dq:.1e}")
    fl = car["floors"]
    t_floor = fl["polars_read_seconds"] + fl["numpy_product_seconds"]
    print(f"fdtemp                   {t_fd:9.3f} s   peak RSS {rss:7.0f} MiB")
    print(f"careful numpy            {t_car:9.3f} s   fdtemp / careful = {t_fd / t_car:.3f}")
    print(f"vectorized numpy         {t_vec:9.2f} s   ratio {t_vec / t_fd:7.1f}x")
    print(f"straightforward numpy    {t_st:9.0f} s   ratio {t_st / t_fd:7.0f}x   (scaled from {small_b} resamples"
          f"{' and 5 leave-one-out fits' if p['jackknife_fits'] else ''})")
    print(f"python floor: polars read {fl['polars_read_seconds']:.2f} s + numpy product {fl['numpy_product_seconds']:.2f} s;"
          f" fdtemp / (read + product) = {t_fd / t_floor:.2f}")
    t_wide = fl["polars_read_seconds"] + fl["numpy_product_with_moments_seconds"]
    print(f"    with the moment columns of re-estimated weights: numpy product"
          f" {fl['numpy_product_with_moments_seconds']:.2f} s; fdtemp / (read + product) = {t_fd / t_wide:.2f}")
    if os.path.exists(FLOOR):
        _, text = run([FLOOR, path, str(b)])
        floor = json.loads(text)
        print(f"fdtemp floor: resampling product {floor['product_seconds']:.2f} s + reading {floor['read_seconds']:.2f} s;"
              f" fdtemp / (product + read) = {t_fd / (floor['product_seconds'] + floor['read_seconds']):.2f}")
        wide = floor["product_with_moments_seconds"]
        print(f"    with the moment columns: product {wide:.2f} s"
              f" ({wide / fl['numpy_product_with_moments_seconds']:.2f}x numpy's BLAS on the same shape);"
              f" fdtemp / (product + read) = {t_fd / (wide + floor['read_seconds']):.2f}")


def w2(work):
    path = os.environ.get("FDTEMP_W2", os.path.join(work, "w2.txt"))
    if not os.path.exists(path):
        print("generating the 10^8-sample record (once)...")
        run([BIN, "synth", "resistor", "--samples", "2", "--quick", "--out", os.path.join(work, "seed.csv"), "--overwrite"])
        # 10^8 lines of white noise at the Johnson level of 1 kOhm, 300 K, 10 kHz.
        import numpy as np
        rng = np.random.default_rng(3)
        sd = (4 * 1.380649e-23 * 300 * 1e3 * 1e4 / 2) ** 0.5
        with open(path, "w") as f:
            for _ in range(10):
                f.write("\n".join(np.char.mod("%.6e", rng.standard_normal(10_000_000) * sd)) + "\n")
    print(f"\n== W2: noise, {os.path.getsize(path) / 1e9:.2f} GB, 2^16-point segments")
    cmd = [BIN, "noise", path, "--sample-rate", "1e4", "--segment", "65536", "--resistance", "1000", "-T", "300"]
    t = median_time(cmd)
    rss = peak_rss(cmd)
    read_floor = os.path.join(EXAMPLES, "read_floor")
    t_read = median_time([read_floor, path])
    t_cat = median_time(["cat", path])
    print(f"fdtemp noise             {t:9.2f} s   peak RSS {rss:7.0f} MiB")
    print(f"read + parse only        {t_read:9.2f} s   fdtemp / read = {t / t_read:.2f}   (cat alone {t_cat:.2f} s)")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--work", default="/tmp/fdtemp-bench")
    ap.add_argument("--only", choices=["W1", "W2", "W3"])
    a = ap.parse_args()
    os.makedirs(a.work, exist_ok=True)
    if "FDTEMP_BIN" not in os.environ:
        subprocess.run(["cargo", "build", "--release", "--examples"], cwd=ROOT, check=True)
    w1 = os.path.join(a.work, "w1.csv")
    w3 = os.path.join(a.work, "w3.csv")
    for path, n in [(w1, 1000), (w3, 100)]:
        if not os.path.exists(path):
            run([BIN, "synth", "two-lines", "--samples", str(n), "--out", path])
    if a.only in (None, "W3"):
        workload("W3", w3, 2000, "bca", a.work)
    if a.only in (None, "W1"):
        workload("W1", w1, 2000, "percentile", a.work)
    if a.only in (None, "W2"):
        w2(a.work)


if __name__ == "__main__":
    main()
