#!/usr/bin/python3
"""The reference job for scripts/bench: the same filtering written as a plain SciPy script
(read the TIFF with tifffile, filter with scipy.ndimage, write the TIFF), file to file.

Usage: bench_scipy_job.py CASE IN OUT [KERNEL.npy]
CASE: gauss2 | sobelmag | convolve
Debian 12: NumPy 1.24, SciPy 1.10.1, tifffile 2022.x.
"""
import sys

import numpy as np
import scipy.ndimage as ndi
import tifffile

case, src, dst = sys.argv[1], sys.argv[2], sys.argv[3]
vol = tifffile.imread(src).astype(np.float32, copy=False)
if case == "gauss2":
    out = ndi.gaussian_filter(vol, 2.0, mode="reflect")
elif case == "sobelmag":
    # Calibrated as tripass's gradient: unnormalised sobel / 32 per axis.
    gz = ndi.sobel(vol, axis=0) / 32
    gy = ndi.sobel(vol, axis=1) / 32
    gx = ndi.sobel(vol, axis=2) / 32
    out = np.sqrt(gx * gx + gy * gy + gz * gz).astype(np.float32)
elif case == "convolve":
    k = np.load(sys.argv[4])
    out = ndi.convolve(vol, k.astype(np.float32), mode="reflect")
else:
    sys.exit("unknown case " + case)
tifffile.imwrite(dst, out.astype(np.float32, copy=False))
