#!/usr/bin/python3
"""Independent check of a multi-order sky map written by the fake broker.

Reads the (gzipped) FITS file with astropy, verifies it against the FITS standard, and prints a
JSON summary computed with numpy/healpy only (no code shared with the TypeScript writer):
row count, columns and units, header keys, total probability, the densest pixel's centre,
the 50 % / 90 % credible areas, and the conditional distance mean/std in the densest pixel by
numerical integration of the Singer et al. 2016 ansatz r^2 N(r; DISTMU, DISTSIGMA).

Run with Debian's interpreter: /usr/bin/python3 fake-alert-broker/check_fits.py FILE [FILE...]
"""
import json
import sys

import astropy
import healpy
import numpy as np
from astropy.io import fits
from astropy.table import Table


def summarise(path):
    with fits.open(path) as hdul:
        # Raises on any violation of the standard that astropy detects.
        hdul.verify("exception")
        header = hdul[1].header
        keys = {k: header.get(k) for k in ("PIXTYPE", "ORDERING", "COORDSYS", "INDXSCHM", "MOCORDER", "OBJECT", "DATE-OBS", "DISTMEAN", "DISTSTD")}
    t = Table.read(path)
    uniq = np.asarray(t["UNIQ"], dtype=np.int64)
    order = (np.floor(np.log2(uniq / 4.0) / 2.0)).astype(np.int64)
    ipix = uniq - 4 * (4 ** order)
    nside = 2 ** order
    area = 4 * np.pi / (12.0 * nside.astype(np.float64) ** 2)
    dens = np.asarray(t["PROBDENSITY"], dtype=np.float64)
    prob = dens * area
    i = int(np.argmax(dens))
    lon, lat = healpy.pix2ang(int(nside[i]), int(ipix[i]), nest=True, lonlat=True)

    srt = np.argsort(-dens, kind="stable")
    cum = np.cumsum(prob[srt])
    sr_to_deg2 = (180.0 / np.pi) ** 2

    def credible_area(level):
        k = int(np.searchsorted(cum, level))
        return float(np.sum(area[srt][: k + 1]) * sr_to_deg2)

    mu = float(t["DISTMU"][i])
    sigma = float(t["DISTSIGMA"][i])
    norm = float(t["DISTNORM"][i])
    r = np.linspace(0.0, mu + 12.0 * sigma, 200001)
    gauss = np.exp(-0.5 * ((r - mu) / sigma) ** 2) / (sigma * np.sqrt(2.0 * np.pi))
    w = r ** 2 * gauss
    z = np.trapezoid(w, r) if hasattr(np, "trapezoid") else np.trapz(w, r)
    trap = np.trapezoid if hasattr(np, "trapezoid") else np.trapz
    mean = trap(r * w, r) / z
    std = np.sqrt(trap(r * r * w, r) / z - mean ** 2)

    return {
        "file": path.split("/")[-1],
        "rows": int(len(t)),
        "columns": list(t.colnames),
        "units": {c: (str(t[c].unit) if t[c].unit is not None else None) for c in t.colnames},
        "dtypes": {c: str(t[c].dtype) for c in t.colnames},
        "header": keys,
        "minOrder": int(order.min()),
        "maxOrder": int(order.max()),
        "probabilitySum": float(prob.sum()),
        "peak": {"ra": float(lon), "dec": float(lat), "order": int(order[i]), "ipix": int(ipix[i])},
        "area50Deg2": credible_area(0.5),
        "area90Deg2": credible_area(0.9),
        "peakDistance": {"mu": mu, "sigma": sigma, "norm": norm, "integratedNorm": float(1.0 / z), "meanMpc": float(mean), "stdMpc": float(std)},
    }


def main():
    out = {
        "versions": {"python": sys.version.split()[0], "astropy": astropy.__version__, "healpy": healpy.__version__, "numpy": np.__version__},
        "maps": [summarise(p) for p in sys.argv[1:]],
    }
    json.dump(out, sys.stdout, indent=1, default=str)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
