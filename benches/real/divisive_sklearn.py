#!/usr/bin/env python3
"""The divisive build's steps in plain NumPy + scikit-learn, timed beside `treewright build
--method divisive` on the same project in the same session (issue 14, "speed, equal work").

Steps and parameters as treewright's defaults (src/model/builder/params.rs): at each node,
the representative is the member with the highest mean expected-likelihood-kernel (ELK)
similarity to the others (exact up to 160 members; above, every member is screened against a
random sample of 128 and the best 32 are rescored exactly); the others, if at least
min_cluster = 4, are split by k-means on the means (k-means++, 3 restarts, at most 100
iterations, tolerance 1e-4) with k from the elbow of the inertia curve k = 1 … 8 (1 restart
per k, on a random subsample of at most 1024 members; knee by the Kneedle rule with S = 1,
else the smallest k reaching 0.9 of the inertia drop); fewer become children of the
representative; depth at most 6. The Kneedle step is a straightforward version (the
difference curve's largest local maximum above its threshold), not a copy of treewright's.

Usage: python3 benches/real/divisive_sklearn.py --bin target/release/treewright [DIR ...]
Prints, per project, the wall time of each and their ratio (Python / treewright).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from sklearn.cluster import KMeans

HERE = Path(__file__).resolve().parent
MAX_DEPTH, K_MAX, MIN_CLUSTER = 6, 8, 4
EXACT_LIMIT, SAMPLE, REFINE, ELBOW_SAMPLE = 160, 128, 32, 1024


def elk_rows(mu, var, rows, cols):
    """log N(mu_r; mu_c, S_r + S_c) for every (r, c), diagonal covariances."""
    s = var[rows][:, None, :] + var[cols][None, :, :]
    d = mu[rows][:, None, :] - mu[cols][None, :, :]
    return -0.5 * (np.log(2 * np.pi * s).sum(-1) + (d * d / s).sum(-1))


def representative(mu, var, members, rng):
    if len(members) <= EXACT_LIMIT:
        sim = elk_rows(mu, var, members, members)
        np.fill_diagonal(sim, 0.0)
        return members[int(np.argmax(sim.sum(1)))]
    sample = rng.choice(members, SAMPLE, replace=False)
    screen = elk_rows(mu, var, members, sample).mean(1)
    best = members[np.argsort(-screen, kind="stable")[:REFINE]]
    exact = np.zeros(len(best))
    for i in range(0, len(members), 4096):
        exact += elk_rows(mu, var, best, members[i : i + 4096]).sum(1)
    return best[int(np.argmax(exact))]


def choose_k(x, rng, seed):
    if len(x) > ELBOW_SAMPLE:
        x = x[rng.choice(len(x), ELBOW_SAMPLE, replace=False)]
    ks = list(range(1, min(K_MAX, len(x)) + 1))
    inertia = np.array([KMeans(k, n_init=1, max_iter=100, tol=1e-4, random_state=seed).fit(x).inertia_ for k in ks])
    if len(ks) < 3 or inertia[0] <= inertia[-1]:
        return max(2, min(2, len(x)))
    kx = (np.array(ks) - ks[0]) / (ks[-1] - ks[0])
    ky = (inertia[0] - inertia) / (inertia[0] - inertia[-1])
    diff = ky - kx
    thr_step = 1.0 * np.mean(np.diff(kx))
    for i in range(1, len(diff) - 1):
        if diff[i] >= diff[i - 1] and diff[i] >= diff[i + 1] and diff[i] - thr_step > 0:
            return max(2, ks[i])
    drop = inertia[0] - inertia
    return max(2, ks[int(np.argmax(drop >= 0.9 * drop[-1]))])


def build(mu, var, seed=0):
    rng = np.random.default_rng(seed)
    parent = {}
    stack = [(np.arange(len(mu)), None, 0)]
    root = None
    while stack:
        members, up, depth = stack.pop()
        rep = representative(mu, var, members, rng)
        if up is None:
            root = rep
        else:
            parent[rep] = up
        rest = members[members != rep]
        if len(rest) == 0:
            continue
        if len(rest) < MIN_CLUSTER or depth + 1 >= MAX_DEPTH:
            for r in rest:
                parent[r] = rep
            continue
        k = min(choose_k(mu[rest], rng, seed), len(rest))
        labels = KMeans(k, n_init=3, max_iter=100, tol=1e-4, random_state=seed).fit(mu[rest]).labels_
        for j in range(k):
            part = rest[labels == j]
            if len(part):
                stack.append((part, rep, depth + 1))
    return root, parent


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--bin", required=True)
    ap.add_argument("dirs", nargs="*")
    a = ap.parse_args()
    dirs = [Path(d) for d in a.dirs] or sorted(p for p in HERE.iterdir() if (p / "project.json").exists())
    tot_py = tot_rs = 0.0
    for d in dirs:
        mu = np.load(d / "means.npy").astype(np.float64)
        var = np.load(d / "variances.npy").astype(np.float64)
        with tempfile.TemporaryDirectory() as tmp:
            t0 = time.perf_counter()
            subprocess.run([a.bin, "build", str(d), "--method", "divisive", "--out", f"{tmp}/t.json",
                            "--report", f"{tmp}/r.json"], check=True, capture_output=True)
            rs = time.perf_counter() - t0
        t0 = time.perf_counter()
        root, parent = build(mu, var)
        py = time.perf_counter() - t0
        assert len(parent) == len(mu) - 1
        tot_py += py
        tot_rs += rs
        print(f"{d.name}: {len(mu)} x {mu.shape[1]}: treewright {rs:.2f} s, numpy+sklearn {py:.2f} s, ratio {py / rs:.1f}")
    print(f"all: treewright {tot_rs:.2f} s, numpy+sklearn {tot_py:.2f} s, ratio {tot_py / tot_rs:.1f}")


if __name__ == "__main__":
    sys.exit(main())
