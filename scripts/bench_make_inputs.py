#!/usr/bin/python3
"""Writes the synthetic float32 inputs of scripts/bench: smooth random structure plus
noise, as multi-page TIFF files (tifffile, Debian 12), and the tilted point-spread
function kernel as .npy.

Usage: bench_make_inputs.py DIR [SIZES...]   (sizes: 128 256 512)
"""
import os
import sys

import numpy as np
import tifffile

d = sys.argv[1]
sizes = [int(s) for s in sys.argv[2:]] or [128, 256, 512]
rng = np.random.default_rng(20261202)
for n in sizes:
    path = os.path.join(d, "vol%d.tif" % n)
    if os.path.exists(path):
        continue
    # Written slice by slice so that the generator needs little memory.
    with tifffile.TiffWriter(path, bigtiff=False) as tw:
        yy, xx = np.mgrid[0:n, 0:n].astype(np.float32)
        for z in range(n):
            sl = (1000 + 400 * np.sin(xx / 9.0 + z / 13.0) * np.cos(yy / 11.0)
                  + 50 * rng.standard_normal((n, n))).astype(np.float32)
            tw.write(sl, contiguous=True)

# The tilted point-spread function of the convolve case: 15×15×15 taps, sigmas 1, 1, 3
# voxels along its own x, y, z axes, turned 30° about y, normalised to sum 1 — a kernel
# designed in NumPy as a user would. Stored with shape (kz, ky, kx).
psf = os.path.join(d, "psf15.npy")
if not os.path.exists(psf):
    r = np.arange(15) - 7.0
    z, y, x = np.meshgrid(r, r, r, indexing="ij")
    a = np.deg2rad(30.0)
    c, s = np.cos(a), np.sin(a)
    # Coordinates in the PSF's own frame: rotate the grid by −30° about y.
    xp = c * x - s * z
    zp = s * x + c * z
    k = np.exp(-0.5 * (xp ** 2 / 1.0 + y ** 2 / 1.0 + zp ** 2 / 9.0))
    np.save(psf, k / k.sum())
