#!/usr/bin/python3
"""Write the benchmark sky maps into a directory (argv[1]); synthetic von Mises-Fisher blob.

  moc.fits   multi-order (NUNIQ) map, ~100k rows, with DISTMU/DISTSIGMA/DISTNORM (astropy.io.fits)
  flat.fits  flat RING map, nside 1024, one float64 PROB column (healpy.write_map)
"""
import os
import sys

import healpy as hp
import numpy as np
from astropy.io import fits

out = sys.argv[1]
center = np.array(hp.ang2vec(150.0, -30.0, lonlat=True))
KAPPA = 40.0


def dens(vec):
    return KAPPA / (2 * np.pi * (1 - np.exp(-2 * KAPPA))) * np.exp(KAPPA * (vec @ center - 1))


# Multi-order: order-4 pixels, the ~100 nearest the centre refined to order 9 (1024 children each).
o4 = np.arange(12 * 4 ** 4)
v4 = np.array(hp.pix2vec(16, o4, nest=True)).T
near = np.argsort(-(v4 @ center))[:98]
keep = np.setdiff1d(o4, near)
fine = (near[:, None] * 1024 + np.arange(1024)[None, :]).ravel()
order = np.concatenate([np.full(keep.size, 4), np.full(fine.size, 9)])
ipix = np.concatenate([keep, fine]).astype(np.int64)
vec = np.concatenate([v4[keep], np.array(hp.pix2vec(512, fine, nest=True)).T])
d = dens(vec)
area = hp.nside2pixarea(2 ** order)
d /= np.sum(d * area)
mu = 200 + 50 * vec[:, 0]
sigma = 60 + 10 * vec[:, 1]
norm = 1 / ((mu ** 2 + sigma ** 2))  # not the exact DISTNORM; timing only
uniq = 4 * 4 ** order.astype(np.int64) + ipix
cols = [fits.Column(name="UNIQ", format="K", array=uniq), fits.Column(name="PROBDENSITY", format="D", array=d),
        fits.Column(name="DISTMU", format="D", array=mu), fits.Column(name="DISTSIGMA", format="D", array=sigma),
        fits.Column(name="DISTNORM", format="D", array=norm)]
hdu = fits.BinTableHDU.from_columns(cols)
hdu.header["PIXTYPE"] = "HEALPIX"
hdu.header["ORDERING"] = "NUNIQ"
fits.HDUList([fits.PrimaryHDU(), hdu]).writeto(os.path.join(out, "moc.fits"), overwrite=True)

ns = 1024
vflat = np.array(hp.pix2vec(ns, np.arange(hp.nside2npix(ns)))).T
p = dens(vflat) * hp.nside2pixarea(ns)
p /= p.sum()
hp.write_map(os.path.join(out, "flat.fits"), p, nest=False, column_names=["PROB"], dtype=np.float64, overwrite=True)
print(len(uniq))
