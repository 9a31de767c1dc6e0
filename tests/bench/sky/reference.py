#!/usr/bin/python3
"""numpy/astropy reference for the sky-map benchmark: read + sort + cumulative sum + area.

usage: reference.py FILE REPEATS   → prints JSON {"ms": [..], "area50": .., "area90": ..}
Times in-process after two untimed warm-up runs (interpreter start and imports excluded), like the
TypeScript side.
"""
import json
import sys
import time

import numpy as np
from astropy.io import fits


def analyse(path):
    with fits.open(path, memmap=False) as hdul:
        hdu = hdul[1]
        ordering = hdu.header["ORDERING"]
        if ordering == "NUNIQ":
            uniq = np.asarray(hdu.data["UNIQ"], dtype=np.int64)
            dens = np.asarray(hdu.data["PROBDENSITY"], dtype=np.float64)
            order = (np.floor(np.log2(uniq / 4) / 2)).astype(np.int64)
            area = 4 * np.pi / (12 * 4.0 ** order)
        else:
            prob = np.asarray(hdu.data["PROB"], dtype=np.float64).ravel()
            area = np.full(prob.size, 4 * np.pi / prob.size)
            dens = prob / area
    idx = np.argsort(-dens)
    cum = np.cumsum((dens * area)[idx])
    cum /= cum[-1]
    cum_area = np.cumsum(area[idx])
    deg2 = (180 / np.pi) ** 2
    return [float(cum_area[np.searchsorted(cum, L)] * deg2) for L in (0.5, 0.9)]


path, repeats = sys.argv[1], int(sys.argv[2])
for _ in range(2):  # warm-up, untimed (same as the TypeScript side)
    analyse(path)
ms = []
for _ in range(repeats):
    t0 = time.perf_counter()
    a50, a90 = analyse(path)
    ms.append((time.perf_counter() - t0) * 1000)
print(json.dumps({"ms": ms, "area50": a50, "area90": a90}))
