#!/usr/bin/python3
"""Make the reference fixtures of tripass's streaming filter engine (package volume).

Run with Debian 12's python3 (NumPy 1.24, SciPy 1.10.1) from the repository root:

    /usr/bin/python3 scripts/make_engine_fixtures.py

It writes volume/testdata/engine/: random float32 volumes (*.f32), the expected outputs
of scipy.ndimage filters on them (*.f32) and manifest.json, which says for each case
the kernel (as taps, dense values, CP terms or a Tucker core and factors), the SciPy
mode and cval, which SciPy function made the expected output, and its file.

Layout: NumPy indexes a stack (z, y, x); every .f32 file is raw little-endian float32 in
C order of (z, y, x), i.e. x fastest, which is tripass's slice layout. Kernel values
in the JSON are in kernel (convolution) order, x fastest for dense arrays, and shapes
are given as [x, y, z]. SciPy's mode names map to tripass's edges: reflect = symmetric,
mirror = reflect, nearest = replicate, wrap = periodic, constant = constant.
"""

import json
import os

import numpy as np
import scipy
from scipy import ndimage

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
OUT = os.path.join(ROOT, "volume", "testdata", "engine")

MODES = [("reflect", 0.0), ("mirror", 0.0), ("nearest", 0.0), ("wrap", 0.0),
         ("constant", 0.0), ("constant", 2.5)]

rng = np.random.default_rng(20261202)


def gauss_taps(sigma, truncate=4.0):
    """SciPy's sampled Gaussian (documented rule): radius int(truncate*sigma + 0.5),
    exp(-x^2 / (2 sigma^2)) normalised to sum 1."""
    r = int(truncate * sigma + 0.5)
    x = np.arange(-r, r + 1, dtype=np.float64)
    g = np.exp(-0.5 * x * x / (sigma * sigma))
    return g / g.sum()


def outer_zyx(x, y, z):
    """The 3D kernel x∘y∘z as a NumPy (z, y, x) array."""
    return np.einsum("k,j,i->kji", np.asarray(z), np.asarray(y), np.asarray(x))


def flat_xyz(k_zyx):
    """Dense kernel values x fastest (C order of (z, y, x))."""
    return [float(v) for v in np.asarray(k_zyx, dtype=np.float64).ravel(order="C")]


volumes = {}
cases = []


def add_volume(name, shape_xyz, offset=0.0, scale=1.0):
    nx, ny, nz = shape_xyz
    v = (offset + scale * rng.random((nz, ny, nx))).astype(np.float32)
    fn = "vol_%s.f32" % name
    v.astype("<f4").tofile(os.path.join(OUT, fn))
    volumes[name] = {"file": fn, "shape": [nx, ny, nz], "array": v}
    return v


def add_case(name, vol, kernel, mode, cval, expected, reference):
    fn = "%s.f32" % name.replace("/", "_")
    np.asarray(expected, dtype=np.float32).astype("<f4").tofile(os.path.join(OUT, fn))
    cases.append({
        "name": name, "volume": vol, "kernel": kernel, "mode": mode, "cval": cval,
        "expected": fn, "reference": reference,
    })


def mode_tag(mode, cval):
    return mode if mode != "constant" else "constant%g" % cval


def convolve(v, k_zyx, mode, cval):
    # Double precision, as the fixtures are the reference: SciPy's own float32 output
    # would add its rounding of intermediate results.
    return ndimage.convolve(v.astype(np.float64), k_zyx, mode=mode, cval=cval)


def main():
    os.makedirs(OUT, exist_ok=True)
    for f in os.listdir(OUT):
        os.remove(os.path.join(OUT, f))

    A = add_volume("a", (11, 9, 7))
    B = add_volume("b", (6, 5, 4))
    C = add_volume("c", (1, 6, 5))
    E = add_volume("e", (3, 2, 2))
    D = add_volume("d", (24, 20, 18))
    F = add_volume("f", (13, 10, 9), offset=100.0, scale=10.0)

    # Separable, asymmetric, even size along y.
    sx, sy, sz = rng.normal(size=5), rng.normal(size=4), rng.normal(size=3)
    # Gaussians, anisotropic (sigma per axis x, y, z).
    gs = (1.0, 1.5, 0.7)
    gx, gy, gz = (gauss_taps(s) for s in gs)
    # Dense random kernels, odd and even sizes (shape x, y, z).
    dense1 = rng.normal(size=(3, 4, 5))  # (z, y, x): 5×4×3
    dense2 = rng.normal(size=(2, 6, 4))  # 4×6×2
    dense2[0, 0, 0] = 0.0  # a zero tap, skipped by direct convolution
    # Three rank-one terms summed.
    terms = [(rng.normal(size=5), rng.normal(size=3), rng.normal(size=4)) for _ in range(3)]
    cp_k = sum(outer_zyx(x, y, z) for x, y, z in terms)
    # Tucker: core r1×r2×r3 = 2×3×2 (x, y, z) and factors for a 5×3×4 kernel.
    core = rng.normal(size=(2, 3, 2))  # indexed [a, b, c] = (x, y, z) modes
    ux, uy, uz = rng.normal(size=(5, 2)), rng.normal(size=(3, 3)), rng.normal(size=(4, 2))
    tucker_k = np.einsum("abc,ia,jb,kc->kji", core, ux, uy, uz)
    # Kernels larger than the volume along every axis.
    bx, by, bz = rng.normal(size=9), rng.normal(size=7), rng.normal(size=11)
    bigdense = rng.normal(size=(5, 7, 8))  # 8×7×5 on volumes b (6×5×4) and e (3×2×2)

    sep_kernel = {"kind": "separable", "x": list(sx), "y": list(sy), "z": list(sz)}
    for mode, cval in MODES:
        tag = mode_tag(mode, cval)
        add_case("sep/" + tag, "a", sep_kernel, mode, cval,
                 convolve(A, outer_zyx(sx, sy, sz), mode, cval), "scipy.ndimage.convolve")
        if mode == "constant" and cval != 0:
            # gaussian_filter pads every 1D pass with cval; the true 3D result is convolve's.
            g_exp, g_ref = convolve(A, outer_zyx(gx, gy, gz), mode, cval), "scipy.ndimage.convolve"
        else:
            g_exp = ndimage.gaussian_filter(A.astype(np.float64), sigma=(gs[2], gs[1], gs[0]),
                                            mode=mode, cval=cval)
            g_ref = "scipy.ndimage.gaussian_filter"
        add_case("gauss/" + tag, "a", {"kind": "separable", "x": list(gx), "y": list(gy),
                                       "z": list(gz)}, mode, cval, g_exp, g_ref)
        add_case("dense/" + tag, "a", {"kind": "dense", "shape": [5, 4, 3], "data": flat_xyz(dense1)},
                 mode, cval, convolve(A, dense1, mode, cval), "scipy.ndimage.convolve")
        add_case("even/" + tag, "a", {"kind": "dense", "shape": [4, 6, 2], "data": flat_xyz(dense2)},
                 mode, cval, convolve(A, dense2, mode, cval), "scipy.ndimage.convolve")
        add_case("cp/" + tag, "a", {"kind": "cp", "terms": [
            {"x": list(x), "y": list(y), "z": list(z)} for x, y, z in terms]},
            mode, cval, convolve(A, cp_k, mode, cval), "scipy.ndimage.convolve")
        add_case("tucker/" + tag, "a", {
            "kind": "tucker", "core_shape": [2, 3, 2],
            # core values with the x mode fastest: element (a, b, c) at a + 2*(b + 3*c)
            "core": [float(v) for v in core.transpose(2, 1, 0).ravel()],
            "ux": [list(ux[:, a]) for a in range(2)],
            "uy": [list(uy[:, b]) for b in range(3)],
            "uz": [list(uz[:, c]) for c in range(2)]},
            mode, cval, convolve(A, tucker_k, mode, cval), "scipy.ndimage.convolve")
        for vol, V in (("b", B), ("e", E), ("c", C)):
            add_case("bigsep/%s/%s" % (vol, tag), vol,
                     {"kind": "separable", "x": list(bx), "y": list(by), "z": list(bz)},
                     mode, cval, convolve(V, outer_zyx(bx, by, bz), mode, cval), "scipy.ndimage.convolve")
            add_case("bigdense/%s/%s" % (vol, tag), vol,
                     {"kind": "dense", "shape": [8, 7, 5], "data": flat_xyz(bigdense)},
                     mode, cval, convolve(V, bigdense, mode, cval), "scipy.ndimage.convolve")
        # Sobel gradient magnitude: sobel(axis) correlates with [-1, 0, 1] along the axis
        # and smooths with [1, 2, 1] across; divided by 32 for a unit ramp to read 1.
        Ad = A.astype(np.float64)
        if mode == "constant" and cval != 0:
            # sobel pads each 1D pass with cval; the true 3D result is convolve's with the
            # outer-product kernels (convolution order: [1, 0, -1] correlates as [-1, 0, 1]).
            d, s = [1.0, 0.0, -1.0], [1.0, 2.0, 1.0]
            ks = [outer_zyx(d, s, s), outer_zyx(s, d, s), outer_zyx(s, s, d)]
            mag = np.sqrt(sum(convolve(A, k, mode, cval) ** 2 for k in ks)) / 32
            ref = "scipy.ndimage.convolve"
        else:
            mag = np.sqrt(sum(ndimage.sobel(Ad, axis=ax, mode=mode, cval=cval) ** 2 for ax in range(3))) / 32
            ref = "scipy.ndimage.sobel"
        add_case("sobelmag/" + tag, "a", {"kind": "sobel_magnitude"}, mode, cval, mag, ref)

    # 61 taps per axis (sigma 7.5): longer than volume d along every axis.
    g61 = gauss_taps(7.5)
    assert len(g61) == 61
    for mode, cval in (("reflect", 0.0), ("wrap", 0.0), ("constant", 0.0)):
        tag = mode_tag(mode, cval)
        add_case("gauss61/" + tag, "d", {"kind": "separable", "x": list(g61), "y": list(g61), "z": list(g61)},
                 mode, cval, ndimage.gaussian_filter(D.astype(np.float64), 7.5, mode=mode, cval=cval),
                 "scipy.ndimage.gaussian_filter")
    # Data far from zero (100..110): float32 rounding relative to the data range.
    g2 = gauss_taps(2.0)
    add_case("gaussoffset/reflect", "f", {"kind": "separable", "x": list(g2), "y": list(g2), "z": list(g2)},
             "reflect", 0.0, ndimage.gaussian_filter(F.astype(np.float64), 2.0, mode="reflect"),
             "scipy.ndimage.gaussian_filter")

    # 61 taps on data ten times as far from zero as its range (values in [1000, 1100]):
    # the hardest case for float32 accumulation.
    G = add_volume("g", (24, 20, 18), offset=1000.0, scale=100.0)
    add_case("gauss61offset/reflect", "g", {"kind": "separable", "x": list(g61), "y": list(g61), "z": list(g61)},
             "reflect", 0.0, ndimage.gaussian_filter(G.astype(np.float64), 7.5, mode="reflect"),
             "scipy.ndimage.gaussian_filter")

    manifest = {
        "generator": "scripts/make_engine_fixtures.py",
        "numpy": np.__version__, "scipy": scipy.__version__,
        "volumes": {k: {"file": v["file"], "shape": v["shape"]} for k, v in volumes.items()},
        "cases": cases,
    }
    with open(os.path.join(OUT, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1)
        f.write("\n")
    print("wrote %d cases to %s" % (len(cases), OUT))


if __name__ == "__main__":
    main()
