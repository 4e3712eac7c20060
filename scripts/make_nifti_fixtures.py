#!/usr/bin/python3
"""Write the NIfTI-1 fixtures of io/nifti with a general-purpose reference library.

Run with Debian 12's interpreter and packages (python3-nibabel 5.0, python3-numpy 1.24):

    /usr/bin/python3 scripts/make_nifti_fixtures.py io/nifti/testdata

For every case it writes NAME.nii and NAME.nii.gz through nibabel, NAME.expected.raw with
the voxel values nibabel reads back (little-endian, x fastest, then y, then z: the layout
tripass slices use), and one manifest.json describing each file as nibabel sees it:
shape, data type, spacing and unit, the qform and sform fields and the affines nibabel
derives from them, scaling, description and the header offset of the data.

The data are a synthetic phantom of our own: a small porous rock core (a cylinder of
grains with round pores, in a background of air) with deterministic noise, scaled to
each data type, with the type's extremes in the first and last voxels.
"""

import gzip
import io
import json
import os
import sys

import nibabel as nib
import numpy as np

SHAPE = (11, 7, 5)  # nx, ny, nz: odd and different, so that axis mix-ups show


def phantom(shape, seed):
    """A porous rock core in air: float64 values in [0, 1]."""
    rng = np.random.default_rng(seed)
    full = tuple(shape[:3]) + (1,) * (3 - len(shape[:3]))  # a 2D image is one slice
    x, y, z = np.meshgrid(*(np.arange(n, dtype=np.float64) for n in full), indexing="ij")
    cx, cy = (full[0] - 1) / 2, (full[1] - 1) / 2
    r = min(full[0], full[1]) / 2
    core = ((x - cx) ** 2 + (y - cy) ** 2) <= r * r
    vol = np.where(core, 0.7, 0.05)
    for _ in range(3):  # round pores inside the core
        px, py, pz = rng.uniform(0, full[0]), rng.uniform(0, full[1]), rng.uniform(0, full[2])
        pore = (x - px) ** 2 + (y - py) ** 2 + (z - pz) ** 2 <= 2.5
        vol = np.where(pore & core, 0.2, vol)
    vol = vol + 0.1 * z / max(full[2] - 1, 1)  # beam hardening along z
    vol = vol + rng.normal(0, 0.04, size=vol.shape)
    vol = np.clip(vol, 0, 1)
    if len(shape) > 3:  # later volumes of a series: the same core, brightening
        vol = np.stack([vol * (1 - 0.1 * t) for t in range(int(np.prod(shape[3:])))], axis=-1)
    return vol.reshape(shape, order="F")


def typed(vol, dtype):
    """Scale a [0, 1] phantom into dtype, putting the type's extremes in the first and
    last voxels."""
    dt = np.dtype(dtype)
    flat = vol.reshape(-1, order="F")  # x fastest
    if dt.kind in "iu":
        info = np.iinfo(dt)
        lo, hi = float(info.min), float(info.max)
        out = np.round(lo + flat * (hi - lo)).clip(lo, hi).astype(dt)
        out[0], out[-1] = info.min, info.max
    else:
        out = (flat * 4000 - 1000).astype(dt)  # densities in Hounsfield-like units
        out[0], out[-1] = np.finfo(dt).min, np.finfo(dt).max
    return out.reshape(vol.shape, order="F")


def rotation(axis, degrees):
    """The 3×3 rotation about axis by degrees (Rodrigues' formula)."""
    a = np.asarray(axis, dtype=np.float64)
    a = a / np.linalg.norm(a)
    t = np.radians(degrees)
    k = np.array([[0, -a[2], a[1]], [a[2], 0, -a[0]], [-a[1], a[0], 0]])
    return np.eye(3) + np.sin(t) * k + (1 - np.cos(t)) * (k @ k)


def qform_affine(spacing, axis, degrees, flip_z, offset):
    """A rigid placement of voxels of the given spacing, optionally left-handed."""
    r = rotation(axis, degrees)
    if flip_z:
        r = r @ np.diag([1.0, 1.0, -1.0])
    a = np.eye(4)
    a[:3, :3] = r @ np.diag(spacing)
    a[:3, 3] = offset
    return a


def sform_affine(spacing, offset):
    """A general affine (with shear), different from every qform above."""
    a = np.eye(4)
    a[:3, :3] = np.array([[spacing[0], 0.1, 0.0], [0.05, spacing[1], 0.2], [0.0, -0.15, spacing[2]]])
    a[:3, 3] = offset
    return a


# name, dtype, extra shape, spacing, unit (nibabel name), byte order, qform, sform, options
CASES = [
    dict(name="uint8_mm", dtype="u1", spacing=(0.9, 0.9, 1.5), unit="mm",
         qform=dict(axis=(1, 2, 3), degrees=20, flip_z=False, offset=(-30.5, 12.25, 7.0), code=1),
         sform=dict(offset=(-31.0, 11.0, 6.5), code=2)),
    dict(name="int8_um", dtype="i1", spacing=(0.65, 0.65, 2.0), unit="micron",
         qform=dict(axis=(0, 0, 1), degrees=90, flip_z=True, offset=(100.0, -50.0, 0.0), code=2)),
    dict(name="int16_be_mm", dtype="i2", order=">", spacing=(0.488, 0.488, 0.625), unit="mm",
         qform=dict(axis=(0, 1, 0), degrees=-15, flip_z=True, offset=(120.0, 100.0, -80.0), code=1),
         sform=dict(offset=(119.0, 101.0, -79.0), code=1)),
    dict(name="uint16_um_ext", dtype="u2", spacing=(6.5, 6.5, 6.5), unit="micron",
         extension=b"tripass fixture: an extension the reader must skip",
         sform=dict(offset=(0.0, 0.0, 0.0), code=2)),
    dict(name="int32_m", dtype="i4", spacing=(2e-4, 2e-4, 5e-4), unit="meter",
         qform=dict(axis=(1, 0, 0), degrees=5, flip_z=False, offset=(0.01, 0.02, 0.03), code=1)),
    dict(name="uint32_nounit", dtype="u4", spacing=(1.0, 2.0, 3.0), unit="unknown",
         qform=dict(axis=(1, 1, 0), degrees=33, flip_z=False, offset=(1.0, 2.0, 3.0), code=1),
         sform=dict(offset=(3.0, 2.0, 1.0), code=4)),
    dict(name="float32_mm", dtype="f4", spacing=(0.3, 0.3, 0.3), unit="mm", special=True,
         qform=dict(axis=(2, -1, 1), degrees=130, flip_z=True, offset=(-1.5, 2.5, -3.5), code=1)),
    dict(name="float64_um", dtype="f8", spacing=(0.1, 0.12, 0.5), unit="micron",
         sform=dict(offset=(5.0, 6.0, 7.0), code=2)),
    # A float phantom that nibabel itself fits into int16 with scl_slope and scl_inter.
    dict(name="scaled_int16_mm", dtype="i2", scaled=True, spacing=(0.8, 0.8, 1.0), unit="mm",
         qform=dict(axis=(0, 0, 1), degrees=0, flip_z=False, offset=(-4.0, -2.4, -2.0), code=1),
         sform=dict(offset=(-4.0, -2.4, -2.0), code=1)),
    # 4D with a single volume is a 3D volume.
    dict(name="float32_4d1_mm", dtype="f4", extra=(1,), spacing=(1.0, 1.0, 2.0), unit="mm",
         qform=dict(axis=(0, 0, 1), degrees=0, flip_z=False, offset=(0.0, 0.0, 0.0), code=1)),
    # 2D: a single slice.
    dict(name="uint16_2d_um", dtype="u2", shape=(11, 7), spacing=(0.5, 0.25, 1.0), unit="micron",
         qform=dict(axis=(0, 0, 1), degrees=0, flip_z=False, offset=(0.0, 0.0, 0.0), code=2)),
    # A time series of three volumes, which tripass refuses.
    dict(name="int16_4d3_mm", dtype="i2", extra=(3,), spacing=(1.0, 1.0, 1.0), unit="mm", reject="4D",
         qform=dict(axis=(0, 0, 1), degrees=0, flip_z=False, offset=(0.0, 0.0, 0.0), code=1)),
]

XYZT = {"unknown": 0, "meter": 1, "mm": 2, "micron": 3}
TRIPASS_UNIT = {"unknown": "", "meter": "m", "mm": "mm", "micron": "um"}


def make(case, outdir, seed):
    shape = tuple(case.get("shape", SHAPE)) + tuple(case.get("extra", ()))
    vol = phantom(shape, seed)
    spacing = np.array(case["spacing"], dtype=np.float64)
    order = case.get("order", "<")
    if case.get("scaled"):
        data = (vol * 3000 - 1000).astype(np.float64)  # nibabel chooses slope/inter for int16
    else:
        data = typed(vol, case["dtype"])
        if case.get("special"):
            flat = data.reshape(-1, order="F")
            for k, v in zip(range(2, flat.size), (np.nan, -np.inf, -0.0)):
                flat[k] = v
            data = flat.reshape(shape, order="F")
    hdr = nib.Nifti1Header(endianness=order)
    img = nib.Nifti1Image(data, None, header=hdr)
    img.header.set_data_dtype(np.dtype(case["dtype"]).newbyteorder(order))
    zooms = list(spacing[: len(case.get("shape", SHAPE))]) + [1.0] * len(case.get("extra", ()))
    img.header.set_zooms(zooms)
    img.header.set_xyzt_units(case["unit"], "sec")
    img.header.set_qform(None, code=0)
    img.header.set_sform(None, code=0)
    q = case.get("qform")
    if q:
        img.header.set_qform(qform_affine(spacing, q["axis"], q["degrees"], q["flip_z"], q["offset"]), code=q["code"])
    s = case.get("sform")
    if s:
        img.header.set_sform(sform_affine(spacing, s["offset"]), code=s["code"])
    img.header["descrip"] = ("tripass fixture " + case["name"] + ": porous rock core phantom").encode()
    if case.get("extension"):
        img.header.extensions.append(nib.nifti1.Nifti1Extension("comment", case["extension"]))

    entries = []
    for ext in (".nii", ".nii.gz"):
        path = os.path.join(outdir, case["name"] + ext)
        img.to_filename(path)
        back = nib.load(path)
        raw_bytes = open(path, "rb").read()
        if ext == ".nii.gz":
            raw_bytes = gzip.decompress(raw_bytes)
        assert raw_bytes[:4] == np.array([348], dtype=order + "i4").tobytes(), "byte order of " + path
        # The header exactly as stored (a loaded image's header has its scaling moved
        # into the data object and its vox_offset reset).
        h = nib.Nifti1Header.from_fileobj(io.BytesIO(raw_bytes))
        slope, inter = h.get_slope_inter()
        if slope is None or (slope == 1 and inter == 0):
            values = np.asanyarray(back.dataobj)  # the stored values, in their type
        else:
            values = back.get_fdata(dtype=np.float64)  # nibabel applies slope and inter
        # x fastest, then y, z and (for a series) volume: each volume is one block.
        exp = values.astype(values.dtype.newbyteorder("<")).reshape(-1, order="F")
        exp_name = case["name"] + ".expected.raw"
        exp.tofile(os.path.join(outdir, exp_name))
        entry = dict(
            file=os.path.basename(path),
            shape=[int(v) for v in back.shape],
            datatype=int(h["datatype"]),
            bitpix=int(h["bitpix"]),
            dtype=str(back.get_data_dtype().name),
            byteorder=order,
            spacing=[float(v) for v in h["pixdim"][1:4]],
            xyzt_units=int(h["xyzt_units"]),
            unit=TRIPASS_UNIT[case["unit"]],
            qform_code=int(h["qform_code"]),
            sform_code=int(h["sform_code"]),
            quatern=[float(h["quatern_b"]), float(h["quatern_c"]), float(h["quatern_d"])],
            qoffset=[float(h["qoffset_x"]), float(h["qoffset_y"]), float(h["qoffset_z"])],
            qfac=float(h["pixdim"][0]),
            srow=[[float(v) for v in h[k]] for k in ("srow_x", "srow_y", "srow_z")],
            affine=back.affine.tolist(),
            qform_affine=h.get_qform().tolist(),
            sform_affine=h.get_sform().tolist(),
            scl_slope=float(h["scl_slope"]),
            scl_inter=float(h["scl_inter"]),
            scaled=slope is not None and (slope != 1 or inter != 0),
            descrip=h["descrip"].item().decode(),
            vox_offset=int(h["vox_offset"]),
        )
        entry["volumes"] = int(np.prod(back.shape[3:]))
        if "reject" in case:
            entry["reject"] = case["reject"]  # Open refuses it; OpenVolume reads each volume
        entry["expected"] = exp_name
        entry["expected_dtype"] = exp.dtype.str
        entries.append(entry)
    return entries


def random_cases(n, seed):
    """n random cases for live cross-checks: every data type, byte order, unit and
    placement code, scaling, extensions, 2D and single-volume 4D shapes."""
    rng = np.random.default_rng(seed)
    dtypes = ["u1", "i1", "i2", "u2", "i4", "u4", "f4", "f8"]
    cases = []
    for i in range(n):
        dtype = str(rng.choice(dtypes))
        shape = (int(rng.integers(1, 14)), int(rng.integers(1, 10)), int(rng.integers(1, 7)))
        case = dict(name="random%02d_%s" % (i, dtype), dtype=dtype, order=str(rng.choice(["<", ">"])),
                    spacing=tuple(float(v) for v in rng.uniform(0.05, 4, 3)),
                    unit=str(rng.choice(list(XYZT))))
        r = rng.random()
        if r < 0.15:
            case["shape"] = shape[:2]
        elif r < 0.3:
            case["shape"], case["extra"] = shape, (1,)
        elif r < 0.4:  # a short series: Open refuses it, OpenVolume reads each volume
            case["shape"], case["extra"], case["reject"] = shape, (int(rng.integers(2, 4)),), "4D"
        else:
            case["shape"] = shape
        if rng.random() < 0.8:
            case["qform"] = dict(axis=tuple(float(v) for v in rng.normal(size=3)), degrees=float(rng.uniform(-180, 180)),
                                 flip_z=bool(rng.random() < 0.5), offset=tuple(float(v) for v in rng.normal(0, 50, 3)),
                                 code=int(rng.integers(1, 5)))
        if rng.random() < 0.6:
            case["sform"] = dict(offset=tuple(float(v) for v in rng.normal(0, 50, 3)), code=int(rng.integers(1, 5)))
        if dtype[0] in "iu" and rng.random() < 0.3:
            case["scaled"] = True
        if dtype[0] == "f" and rng.random() < 0.5:
            case["special"] = True
        if rng.random() < 0.2:
            case["extension"] = b"random extension %d" % i
        cases.append(case)
    return cases


def main():
    import argparse

    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("outdir", nargs="?", default="io/nifti/testdata")
    ap.add_argument("--random", type=int, default=0, metavar="N",
                    help="write N random cases instead of the committed fixtures (live cross-checks)")
    ap.add_argument("--seed", type=int, default=1, help="seed of the random cases")
    args = ap.parse_args()
    outdir = args.outdir
    os.makedirs(outdir, exist_ok=True)
    manifest = dict(
        generator="scripts/make_nifti_fixtures.py",
        nibabel=nib.__version__,
        numpy=np.__version__,
        files=[],
    )
    cases = random_cases(args.random, args.seed) if args.random else CASES
    for i, case in enumerate(cases):
        manifest["files"] += make(case, outdir, seed=1000 + i)
    with open(os.path.join(outdir, "manifest.json"), "w") as f:
        json.dump(manifest, f, indent=1, allow_nan=True)
        f.write("\n")


if __name__ == "__main__":
    main()
