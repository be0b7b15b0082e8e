#!/usr/bin/env python3
"""Side-by-side timings of fdtemp and the numpy references (issue workloads W1–W3).

    pip install numpy scipy pandas        # the references need these; fdtemp does not
    python3 benches/compare.py [--work DIR] [--only W3]

W1: fit, 1000 samples x 1200 points (12 waiting times x 100 times), B = 10,000, BCa.
W3: the same with 100 samples and B = 2,000 (the everyday case).
W2: noise on a 10^8-sample text record (generated here, ~1.4 GB), 2^16-point segments,
    against the time to read and parse the same file's numbers alone.

Times are whole processes (reading the CSV included), median of 3 runs for fdtemp and
the vectorized reference. The straightforward reference is too slow to run whole at these
sizes: its resample cost is timed on a few resamples and its jackknife on a few
leave-one-out fits, then scaled linearly (stated in the output). Before timing, the
estimates of X and q of all three are compared on each file.
"""
import argparse
import json
import os
import statistics
import subprocess
import sys
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "fdtemp")
FLOOR = os.path.join(ROOT, "target", "release", "examples", "product_floor")
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


def fdtemp_fit(path, b, json_out):
    return [BIN, "fit", path, "-T", "0.6", "-B", str(b), "--json", json_out, "--overwrite"]


def workload(name, path, b, work):
    print(f"\n== {name}: {os.path.basename(path)}, B = {b}")
    out = os.path.join(work, f"{name}.json")
    t_fd = median_time(fdtemp_fit(path, b, out))
    rss = peak_rss(fdtemp_fit(path, b, out))
    fd = json.load(open(out))["fits"]
    t_vec_runs = []
    for _ in range(3):
        t, text = run([sys.executable, os.path.join(REF, "vectorized.py"), path, "--resamples", str(b)])
        t_vec_runs.append(t)
    vec = json.loads(text)
    t_vec = statistics.median(t_vec_runs)
    small_b = 4
    _, text = run([sys.executable, os.path.join(REF, "straightforward.py"), path, "--resamples", str(small_b),
                   "--jackknife-limit", "5"])
    st = json.loads(text)
    p = st["parts"]
    t_st = p["read"] + p["resamples"] / small_b * b + p["jackknife"] / p["jackknife_fits"] * p["samples"]
    _, text = run([FLOOR, path, str(b)])
    floor = json.loads(text)
    agree = max(abs(a["x"]["estimate"] - c["ratio"]) for a, c in zip(fd, vec["fits"]))
    agree_q = max(abs(a["break"]["estimate"] - c["break"]) for a, c in zip(fd, vec["fits"]) if a["break"]["estimate"] is not None)
    agree_st = max(abs(a["x"]["estimate"] - c["ratio"]) for a, c in zip(fd, st["fits"]))
    print(f"estimates agree: |X_fdtemp - X_vectorized| <= {agree:.1e}, |q| <= {agree_q:.1e}, |X - X_straightforward| <= {agree_st:.1e}")
    print(f"fdtemp                   {t_fd:9.2f} s   peak RSS {rss:7.0f} MiB")
    print(f"vectorized numpy         {t_vec:9.2f} s   ratio {t_vec / t_fd:7.1f}x")
    print(f"straightforward numpy    {t_st:9.0f} s   ratio {t_st / t_fd:7.0f}x   (scaled from {small_b} resamples and 5 leave-one-out fits)")
    print(f"floor: resampling product {floor['product_seconds']:.2f} s + reading {floor['read_seconds']:.2f} s;"
          f" fdtemp / (product + read) = {t_fd / (floor['product_seconds'] + floor['read_seconds']):.2f}")


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
    read_floor = os.path.join(ROOT, "target", "release", "examples", "read_floor")
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
    subprocess.run(["cargo", "build", "--release", "--examples"], cwd=ROOT, check=True)
    w1 = os.path.join(a.work, "w1.csv")
    w3 = os.path.join(a.work, "w3.csv")
    for path, n in [(w1, 1000), (w3, 100)]:
        if not os.path.exists(path):
            run([BIN, "synth", "two-lines", "--samples", str(n), "--out", path])
    if a.only in (None, "W3"):
        workload("W3", w3, 2000, a.work)
    if a.only in (None, "W1"):
        workload("W1", w1, 10000, a.work)
    if a.only in (None, "W2"):
        w2(a.work)


if __name__ == "__main__":
    main()
