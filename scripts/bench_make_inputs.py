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
