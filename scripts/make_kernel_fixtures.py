#!/usr/bin/python3
"""Make the reference fixtures for tripass's built-in kernels and its .npy reader/writer.

Run with Debian 12's python3 (NumPy 1.24, SciPy 1.10.1) from the repository root:

    /usr/bin/python3 scripts/make_kernel_fixtures.py

It writes
  tensor/testdata/scipy_kernels.json  impulse responses of scipy.ndimage filters
  io/npy/testdata/*.npy               arrays saved by numpy in every supported dtype,
                                      memory order and format version
  io/npy/testdata/manifest.json       what each .npy file holds (C-order values)
  cmd/tripass/testdata/kernels/*.npy  SciPy impulse responses saved as kernel files, in
                                      NumPy's (kz, ky, kx) layout, for the CLI's loader

The impulse response of a linear filter with mode='constant' (zero outside) on a
volume holding a single 1 at the kernel's centre is the convolution kernel itself,
which is what tripass's kernels are compared with. Volumes here are indexed (z, y, x)
as NumPy stores a stack of slices; the JSON stores "shape" as [kx, ky, kz] and "data"
flattened in C order of (z, y, x), i.e. x fastest, the layout of tensor.Dense.
"""

import json
import os
import sys

import numpy as np
import scipy
from scipy import ndimage

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")


def radius(sigma, truncate=4.0):
    """SciPy's Gaussian half-width: int(truncate * sigma + 0.5)."""
    return int(truncate * sigma + 0.5)


def impulse(shape_zyx):
    v = np.zeros(shape_zyx, dtype=np.float64)
    v[tuple(n // 2 for n in shape_zyx)] = 1.0
    return v


def case(name, params, out_zyx):
    out_zyx = np.asarray(out_zyx, dtype=np.float64)
    while out_zyx.ndim < 3:
        out_zyx = out_zyx[np.newaxis]
    kz, ky, kx = out_zyx.shape
    return {
        "name": name,
        "params": params,
        "shape": [kx, ky, kz],
        "data": [float(v) for v in out_zyx.ravel(order="C")],
    }


def kernel_cases():
    cases = []
    # 1D Gaussians and derivatives: gaussian_filter1d on an impulse of 2r+1 samples.
    for sigma in (0.5, 1.0, 1.7, 3.0):
        for truncate in (4.0, 2.5):
            for order in range(4):
                r = radius(sigma, truncate)
                out = ndimage.gaussian_filter1d(impulse((2 * r + 1,)), sigma, order=order,
                                                mode="constant", truncate=truncate)
                cases.append(case("gaussian_filter1d",
                                  {"sigma": sigma, "order": order, "truncate": truncate}, out))

    # 3D Gaussians with anisotropic sigma and derivative orders (x, y, z).
    for sxyz, oxyz in [((1.0, 1.5, 0.7), (0, 0, 0)),
                       ((1.0, 1.5, 0.7), (1, 0, 0)),
                       ((1.0, 1.5, 0.7), (0, 2, 0)),
                       ((1.0, 1.5, 0.7), (0, 0, 1)),
                       ((1.2, 0.8, 1.0), (1, 1, 0)),
                       ((0.9, 1.1, 1.3), (0, 0, 3)),
                       ((1.5, 1.0, 0.0), (0, 0, 0))]:
        shape = tuple(2 * radius(s) + 1 for s in reversed(sxyz))
        out = ndimage.gaussian_filter(impulse(shape), sigma=tuple(reversed(sxyz)),
                                      order=tuple(reversed(oxyz)), mode="constant")
        cases.append(case("gaussian_filter", {"sigma": list(sxyz), "order": list(oxyz)}, out))

    # Sobel along x, y, z (SciPy axes 2, 1, 0).
    for axis in range(3):
        out = ndimage.sobel(impulse((3, 3, 3)), axis=2 - axis, mode="constant")
        cases.append(case("sobel", {"axis": axis}, out))

    out = ndimage.laplace(impulse((3, 3, 3)), mode="constant")
    cases.append(case("laplace", {}, out))

    for sxyz in [(1.0, 1.3, 0.8), (0.7, 0.7, 0.7)]:
        shape = tuple(2 * radius(s) + 1 for s in reversed(sxyz))
        out = ndimage.gaussian_laplace(impulse(shape), sigma=tuple(reversed(sxyz)),
                                       mode="constant")
        cases.append(case("gaussian_laplace", {"sigma": list(sxyz)}, out))

    for size in [(3, 5, 1), (3, 3, 3), (1, 1, 7)]:
        out = ndimage.uniform_filter(impulse(tuple(reversed(size))), size=tuple(reversed(size)),
                                     mode="constant")
        cases.append(case("uniform_filter", {"size": list(size)}, out))

    # Difference of Gaussians: gaussian_filter(s1) - gaussian_filter(s2) on one impulse
    # as large as the wider Gaussian.
    for s1, s2 in [((1.0, 1.0, 1.0), (1.6, 1.6, 1.6)), ((0.8, 1.2, 0.5), (1.5, 1.0, 1.0))]:
        shape = tuple(2 * max(radius(a), radius(b)) + 1 for a, b in zip(reversed(s1), reversed(s2)))
        imp = impulse(shape)
        out = (ndimage.gaussian_filter(imp, tuple(reversed(s1)), mode="constant")
               - ndimage.gaussian_filter(imp, tuple(reversed(s2)), mode="constant"))
        cases.append(case("difference_of_gaussians", {"sigma1": list(s1), "sigma2": list(s2)}, out))

    # Doc check values (also in REFERENCES.md), default mode 'reflect'.
    doc = {
        "input": [1.0, 2.0, 3.0, 4.0, 5.0],
        "sigma1": [float(v) for v in ndimage.gaussian_filter1d(np.arange(1.0, 6.0), 1)],
        "sigma4": [float(v) for v in ndimage.gaussian_filter1d(np.arange(1.0, 6.0), 4)],
    }
    return {"generator": "scripts/make_kernel_fixtures.py",
            "numpy": np.__version__, "scipy": scipy.__version__,
            "cases": cases, "gaussian_filter1d_reflect": doc}


def npy_fixtures(outdir):
    """Arrays saved by numpy in every dtype, order and version tripass reads."""
    os.makedirs(outdir, exist_ok=True)
    manifest = []
    shapes = [(2, 3, 4), (5,), (3, 4), (), (0, 3)]
    descrs = ["<f8", ">f8", "<f4", ">f4", "<f2", ">f2", "|i1", "|u1", "<i2", ">i2", "<u2", "<i4", ">i4",
              "<u4", "<i8", ">i8", "<u8", "|b1"]
    for descr in descrs:
        dt = np.dtype(descr)
        for shape in shapes:
            n = int(np.prod(shape))
            i = np.arange(n, dtype=np.float64)
            if dt.kind == "f":
                vals = i * 0.25 - 3.0  # exact in float32 and float64
            elif dt.kind == "i":
                vals = i * 3 - 7
            elif dt.kind == "u":
                vals = i * 5
            else:
                vals = (i % 3 == 0).astype(np.float64)
            c = vals.reshape(shape).astype(dt)
            for fortran in (False, True):
                if fortran and len(shape) < 2:
                    continue
                arr = c.copy(order="F" if fortran else "C")
                for version in ((1, 0), (2, 0), (3, 0)):
                    if version != (1, 0) and (shape != (2, 3, 4) or descr not in ("<f8", ">f4")):
                        continue  # later versions differ only in the header
                    shape_name = "x".join(str(d) for d in shape) or "scalar"
                    name = "%s_%s_%s_v%d.npy" % (
                        descr.replace("<", "le").replace(">", "be").replace("|", ""),
                        shape_name, "F" if fortran else "C", version[0])
                    path = os.path.join(outdir, name)
                    with open(path, "wb") as f:
                        if version == (1, 0):
                            np.save(f, arr)
                        else:
                            np.lib.format.write_array(f, arr, version=version)
                    back = np.load(path)
                    assert np.array_equal(back, c), name
                    with open(path, "rb") as f:
                        # What numpy actually wrote: it stores an array that is both C-
                        # and Fortran-contiguous (size 0 or 1) as C order.
                        v = np.lib.format.read_magic(f)
                        _, stored_fortran, _ = np.lib.format._read_array_header(f, v)
                    manifest.append({"file": name, "descr": descr, "fortran_order": stored_fortran,
                                     "version": list(version), "shape": list(shape),
                                     "values": [float(v) for v in c.ravel(order="C")]})
    # Golden outputs for tripass's writer: what numpy.save writes for float64 and float32
    # C-order arrays whose C-order values are i*0.25 - 3.
    for descr, shape in [("<f8", (2, 3, 4)), ("<f4", (2, 3, 4)), ("<f8", (7,)),
                         ("<f8", (11, 11, 11))]:
        n = int(np.prod(shape))
        arr = (np.arange(n, dtype=np.float64) * 0.25 - 3.0).reshape(shape).astype(descr)
        name = "golden_%s_%s.npy" % (descr[1:], "x".join(str(d) for d in shape))
        np.save(os.path.join(outdir, name), arr)
    return manifest


def cli_fixtures(outdir):
    """Kernel files as a NumPy user would save them: arrays indexed (z, y, x)."""
    os.makedirs(outdir, exist_ok=True)
    # Gaussian x-derivative, sigma (x, y, z) = (1.0, 1.5, 0.7): SciPy's axis 2 is x.
    sxyz, oxyz = (1.0, 1.5, 0.7), (1, 0, 0)
    shape = tuple(2 * radius(s) + 1 for s in reversed(sxyz))
    g = ndimage.gaussian_filter(impulse(shape), sigma=tuple(reversed(sxyz)),
                                order=tuple(reversed(oxyz)), mode="constant")
    np.save(os.path.join(outdir, "gauss_dx_C.npy"), g)
    np.save(os.path.join(outdir, "gauss_dx_F_f4.npy"), np.asfortranarray(g.astype(">f4")))
    # A flat 2D kernel (ky, kx): SciPy's 2D sobel along x (axis 1) of a 3x3 impulse.
    s2 = ndimage.sobel(impulse((3, 3)), axis=1, mode="constant")
    np.save(os.path.join(outdir, "sobel2d_x.npy"), s2)
    # A 1D kernel along x.
    np.save(os.path.join(outdir, "row5.npy"), np.array([1.0, 4.0, 6.0, 4.0, 1.0]) / 16)


def main():
    if len(sys.argv) > 1:
        sys.exit("usage: make_kernel_fixtures.py (no arguments; run from anywhere)")
    kdir = os.path.join(ROOT, "tensor", "testdata")
    os.makedirs(kdir, exist_ok=True)
    with open(os.path.join(kdir, "scipy_kernels.json"), "w") as f:
        json.dump(kernel_cases(), f, indent=None, separators=(",", ":"))
        f.write("\n")
    cli_fixtures(os.path.join(ROOT, "cmd", "tripass", "testdata", "kernels"))
    ndir = os.path.join(ROOT, "io", "npy", "testdata")
    manifest = npy_fixtures(ndir)
    with open(os.path.join(ndir, "manifest.json"), "w") as f:
        json.dump({"generator": "scripts/make_kernel_fixtures.py", "numpy": np.__version__,
                   "files": manifest}, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
