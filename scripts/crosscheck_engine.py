#!/usr/bin/python3
"""Live cross-check of tripass's filter engine against scipy.ndimage (Debian's SciPy).

The Go test volume.TestLiveCrossCheckSciPy (run when TRIPASS_LIVE_SCIPY=1 or
TRIPASS_LIVE=1) draws random cases, writes them to a folder and runs

    /usr/bin/python3 scripts/crosscheck_engine.py FOLDER

This script reads FOLDER/cases.json and, for each case, the input volume (raw
little-endian float32, x fastest: NumPy shape (z, y, x)); it writes the expected
output of each case to FOLDER/<name>.expected.f32 and the reference it used to
FOLDER/references.json. Kinds of case:
  dense     a kernel given as values (x fastest, shape [kx, ky, kz], convolution order):
            scipy.ndimage.convolve
  gaussian  sigmas [sx, sy, sz]: scipy.ndimage.gaussian_filter, or, with mode
            'constant' and cval != 0, scipy.ndimage.convolve of the sampled Gaussian's
            outer product (gaussian_filter pads every 1D pass with cval itself)
  sobel     gradient magnitude sqrt(sum over axes of sobel(axis)^2) / 32:
            scipy.ndimage.sobel (the same convolve caveat for cval != 0)
Computations are in float64. Exit status 3 means NumPy or SciPy is missing.
"""

import json
import os
import sys

try:
    import numpy as np
    from scipy import ndimage
except ImportError as exc:  # the Go test skips on status 3
    print("crosscheck_engine: %s" % exc, file=sys.stderr)
    sys.exit(3)


def gauss_taps(sigma, truncate=4.0):
    r = int(truncate * sigma + 0.5)
    x = np.arange(-r, r + 1, dtype=np.float64)
    g = np.exp(-0.5 * x * x / (sigma * sigma))
    return g / g.sum()


def outer_zyx(x, y, z):
    return np.einsum("k,j,i->kji", np.asarray(z), np.asarray(y), np.asarray(x))


def main(folder):
    with open(os.path.join(folder, "cases.json")) as f:
        cases = json.load(f)
    refs = {}
    for c in cases:
        nx, ny, nz = c["shape"]
        v = np.fromfile(os.path.join(folder, c["input"]), dtype="<f4").reshape(nz, ny, nx)
        v = v.astype(np.float64)
        mode, cval = c["mode"], c["cval"]
        true3d = mode == "constant" and cval != 0
        if c["kind"] == "dense":
            kx, ky, kz = c["kshape"]
            k = np.asarray(c["kernel"], dtype=np.float64).reshape(kz, ky, kx)
            out = ndimage.convolve(v, k, mode=mode, cval=cval)
            ref = "scipy.ndimage.convolve"
        elif c["kind"] == "gaussian":
            sx, sy, sz = c["sigma"]
            if true3d:
                k = outer_zyx(gauss_taps(sx), gauss_taps(sy), gauss_taps(sz))
                out = ndimage.convolve(v, k, mode=mode, cval=cval)
                ref = "scipy.ndimage.convolve"
            else:
                out = ndimage.gaussian_filter(v, sigma=(sz, sy, sx), mode=mode, cval=cval)
                ref = "scipy.ndimage.gaussian_filter"
        elif c["kind"] == "sobel":
            if true3d:
                d, s = [1.0, 0.0, -1.0], [1.0, 2.0, 1.0]
                ks = [outer_zyx(d, s, s), outer_zyx(s, d, s), outer_zyx(s, s, d)]
                out = np.sqrt(sum(ndimage.convolve(v, k, mode=mode, cval=cval) ** 2 for k in ks)) / 32
                ref = "scipy.ndimage.convolve"
            else:
                out = np.sqrt(sum(ndimage.sobel(v, axis=a, mode=mode, cval=cval) ** 2 for a in range(3))) / 32
                ref = "scipy.ndimage.sobel"
        else:
            raise SystemExit("unknown case kind %r" % c["kind"])
        out.astype("<f4").tofile(os.path.join(folder, c["name"] + ".expected.f32"))
        refs[c["name"]] = ref
    with open(os.path.join(folder, "references.json"), "w") as f:
        json.dump(refs, f)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        raise SystemExit("usage: crosscheck_engine.py FOLDER")
    main(sys.argv[1])
