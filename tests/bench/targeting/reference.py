#!/usr/bin/python3
"""numpy/healpy reference for the ranking benchmark: crossmatch the WHOLE catalogue with the map
(healpy.ang2pix at every order in the map + NUNIQ lookup), credible-region threshold (argsort +
cumsum), score (same closed form as src/lib/targeting/galaxies.ts), argsort of the candidates.

usage: reference.py MAP.fits CATALOG_DIR ROWS REPEATS  → JSON {"ms": [...], "candidates": n, "top": [rows]}
The catalogue is read from raw float64 files (ra, dec, dist, err, weight) written by the benchmark;
reading is not timed; two untimed warm-up runs, like the TypeScript side.
"""
import json
import os
import sys
import time

import healpy as hp
import numpy as np
from astropy.io import fits
from scipy.special import ndtr

path, catdir, rows, repeats = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])
cols = {k: np.fromfile(os.path.join(catdir, k + ".f64"), dtype="<f8") for k in ("ra", "dec", "dist", "err", "weight")}
assert cols["ra"].size == rows
with fits.open(path) as hdul:
    d = hdul[1].data
    uniq = np.asarray(d["UNIQ"], dtype=np.int64)
    dens = np.asarray(d["PROBDENSITY"], dtype=np.float64)
    mu = np.asarray(d["DISTMU"], dtype=np.float64)
    sigma = np.asarray(d["DISTSIGMA"], dtype=np.float64)
    norm = np.asarray(d["DISTNORM"], dtype=np.float64)
order = np.floor(np.log2(uniq / 4) / 2).astype(np.int64)
area = 4 * np.pi / (12 * 4.0 ** order)
dens = dens / np.sum(dens * area)


def rank():
    ra, dec, dist, err, w = cols["ra"], cols["dec"], cols["dist"], cols["err"], cols["weight"]
    srt = np.argsort(uniq)
    su = uniq[srt]
    row = np.full(ra.size, -1, dtype=np.int64)
    for o in np.unique(order):
        u = 4 * 4 ** int(o) + hp.ang2pix(2 ** int(o), ra, dec, nest=True, lonlat=True).astype(np.int64)
        k = np.searchsorted(su, u)
        k[k >= su.size] = 0
        hit = su[k] == u
        row[hit] = srt[k[hit]]
    idx = np.argsort(-dens, kind="stable")
    cum = np.cumsum((dens * area)[idx])
    t = dens[idx[np.searchsorted(cum, 0.99 * cum[-1])]]
    sel = np.flatnonzero(row >= 0)
    sel = sel[dens[row[sel]] >= t]
    r = row[sel]
    m_, s_, sd = mu[r], sigma[r], err[sel]
    s2 = s_ ** 2 + sd ** 2
    s = np.sqrt(s2)
    g = np.exp(-0.5 * ((dist[sel] - m_) / s) ** 2) / (s * np.sqrt(2 * np.pi))
    g *= ndtr(((m_ * sd ** 2 + dist[sel] * s_ ** 2) / s2) / (s_ * sd / s)) / ndtr(dist[sel] / sd)
    score = dens[r] * norm[r] * g * w[sel]
    o = np.argsort(-score, kind="stable")
    return sel[o], score[o] / score.sum()


for _ in range(2):
    rank()
ms = []
for _ in range(repeats):
    t0 = time.perf_counter()
    top, prob = rank()
    ms.append((time.perf_counter() - t0) * 1000)
print(json.dumps({"ms": ms, "candidates": int(top.size), "top": [int(v) for v in top[:20]], "prob0": float(prob[0])}))
