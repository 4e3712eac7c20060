#!/usr/bin/python3
"""Write the TIFF fixtures of io/tiffstack/testdata.

Reference writers: tifffile 2023.2.3 and NumPy 1.24.2 (Debian 12's python3-tifffile and
python3-numpy) write the plain stacks; libtiff 4.5.0's tiffcp (Debian 12's libtiff-tools)
rewrites them with LZW, Deflate, PackBits, the predictors, big-endian byte order, BigTIFF
and tiles, which Debian's tifffile cannot write without imagecodecs. Beside the stacks,
NumPy writes the expected voxels of each sample type as raw little-endian bytes
(<type>.bin, z then y then x), and manifest.json lists every fixture with what a reader
must find in it.

Run from the repository root:  /usr/bin/python3 scripts/make_tiff_fixtures.py
The data are a synthetic cleared-tissue block with bright nuclei, a ramp, noise from a
fixed seed and the extremes of each type; sizes are odd (17 x 13 x 5) so that strips and
tiles do not divide them.
"""

import json
import os
import shutil
import subprocess
import sys

import numpy as np
import tifffile

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "io", "tiffstack", "testdata")
NX, NY, NZ = 17, 13, 5
SPACING_UM = 0.65  # x and y spacing written as XResolution/YResolution in pixels per cm

TYPES = ["uint8", "uint16", "int16", "uint32", "int32", "float32", "float64"]
SHORT = {"uint8": "u8", "uint16": "u16", "int16": "i16", "uint32": "u32", "int32": "i32",
         "float32": "f32", "float64": "f64"}


def phantom(dtype, rng):
    """A small block of tissue: dim background, a few bright nuclei, a ramp, noise."""
    z, y, x = np.mgrid[0:NZ, 0:NY, 0:NX].astype(np.float64)
    v = 20 + 3 * x + 2 * y + 5 * z
    for cz, cy, cx, r in [(1, 4, 5, 2.5), (3, 9, 12, 3.0), (2, 6, 14, 1.5)]:
        d2 = (x - cx) ** 2 + (y - cy) ** 2 + ((z - cz) * 2) ** 2
        v += 180 * np.exp(-d2 / (2 * r * r))
    v += rng.normal(0, 4, v.shape)
    dt = np.dtype(dtype)
    if dt.kind == "f":
        a = (v / 7.3).astype(dt)
        a[0, 0, 0], a[0, 0, 1], a[0, 0, 2] = -np.inf, np.inf, np.nan
        a[1, 0, 0], a[1, 0, 1] = np.finfo(dt).tiny, -np.finfo(dt).max
        return a
    info = np.iinfo(dt)
    scale = (info.max - max(info.min, 0)) / 400.0
    a = np.clip(np.round(v * scale + (info.min / 2 if info.min < 0 else 0)), info.min, info.max).astype(dt)
    a[0, 0, 0], a[0, 0, 1] = info.min, info.max
    return a


def tiffcp(args, src, dst):
    subprocess.run(["tiffcp"] + args + [src, dst], check=True)


def main():
    if os.path.isdir(OUT):
        for name in os.listdir(OUT):
            p = os.path.join(OUT, name)
            if name.endswith((".tif", ".tiff", ".bin")) or name in ("manifest.json", "README"):
                os.remove(p)
            elif name.startswith("folder_"):
                shutil.rmtree(p)
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(20261202)
    libtiff = subprocess.run(["tiffcp"], capture_output=True, text=True).stderr.splitlines()[0]
    manifest = {
        "generator": "scripts/make_tiff_fixtures.py",
        "versions": {"tifffile": tifffile.__version__, "numpy": np.__version__, "libtiff": libtiff},
        "fixtures": [],
    }

    def add(name, dtype, **want):
        path = os.path.join(OUT, name)
        # Read back the resolution tifffile or tiffcp actually stored, to state the
        # spacing a reader must derive: micrometres per pixel = 10000 / (pixels per cm).
        with tifffile.TiffFile(path) as tf:
            p0 = tf.pages[0]
            tags = p0.tags
            sx = sy = 0.0
            unit = ""
            if "XResolution" in tags and "ResolutionUnit" in tags and tags["ResolutionUnit"].value == 3:
                xn, xd = tags["XResolution"].value
                yn, yd = tags["YResolution"].value
                sx, sy, unit = 10000 / (xn / xd), 10000 / (yn / yd), "um"
            npages = len(tf.pages)
            # Check that tifffile (for what it can decode) or libtiff reads our expectation.
            entry = {
                "file": name, "data": dtype + ".bin", "type": dtype,
                "size": [NX, NY, NZ], "spacing": [sx, sy, 0.0], "unit": unit,
                "pages": npages, "bigtiff": tf.is_bigtiff,
                "byteorder": "big" if tf.byteorder == ">" else "little",
                "compression": p0.compression.name, "predictor": int(p0.predictor),
                "tiled": p0.is_tiled,
            }
        entry.update(want)
        manifest["fixtures"].append(entry)

    for dtype in TYPES:
        a = phantom(dtype, rng)
        a.astype(a.dtype.newbyteorder("<")).tofile(os.path.join(OUT, dtype + ".bin"))
        s = SHORT[dtype]
        res = (10000 / SPACING_UM, 10000 / SPACING_UM)
        base = f"{s}_strips.tif"
        tifffile.imwrite(os.path.join(OUT, base), a, photometric="minisblack", rowsperstrip=4,
                         resolution=res, resolutionunit="CENTIMETER", metadata=None)
        add(base, dtype)
        name = f"{s}_strips_be.tif"
        tifffile.imwrite(os.path.join(OUT, name), a, photometric="minisblack", rowsperstrip=5,
                         byteorder=">", resolution=res, resolutionunit="CENTIMETER", metadata=None)
        add(name, dtype)
        name = f"{s}_tiles.tif"
        tifffile.imwrite(os.path.join(OUT, name), a, photometric="minisblack", tile=(16, 16),
                         resolution=res, resolutionunit="CENTIMETER", metadata=None)
        add(name, dtype)
        name = f"{s}_bigtiff.tif"
        tifffile.imwrite(os.path.join(OUT, name), a, photometric="minisblack", bigtiff=True,
                         rowsperstrip=3, metadata=None)
        add(name, dtype)
        name = f"{s}_deflate.tif"
        tifffile.imwrite(os.path.join(OUT, name), a, photometric="minisblack", compression="zlib",
                         rowsperstrip=6, metadata=None)
        add(name, dtype)
        src = os.path.join(OUT, base)
        pred = "3" if a.dtype.kind == "f" else "2"
        # libtiff 4.5.0 writes the floating-point predictor wrongly into big-endian files
        # on a little-endian machine (its own reader then returns byte-swapped values;
        # TN3 puts the most significant byte plane first in either byte order), so the
        # big-endian float fixtures use horizontal differencing, which libtiff also
        # applies to float samples (as integers of the same width).
        bepred = "2"
        variants = [
            ("lzw", ["-c", "lzw"]),
            ("lzw_pred", ["-c", "lzw:" + pred]),
            ("zip_pred", ["-c", "zip:" + pred]),
            ("packbits", ["-c", "packbits"]),
            ("lzw_pred_be", ["-B", "-c", "lzw:" + bepred]),
            ("zip_pred_big_be_tiles", ["-8", "-B", "-t", "-w", "16", "-l", "16", "-c", "zip:" + bepred]),
            ("lzw_pred_tiles", ["-t", "-w", "16", "-l", "16", "-c", "lzw:" + pred]),
            ("packbits_big_be", ["-8", "-B", "-c", "packbits"]),
        ]
        if dtype == "uint16":
            # Tiles far larger than the image, as some writers use by default.
            variants.append(("lzw_tiles512", ["-t", "-w", "512", "-l", "512", "-c", "lzw:2"]))
        for tag, args in variants:
            name = f"{s}_{tag}.tif"
            tiffcp(args, src, os.path.join(OUT, name))
            add(name, dtype)

    # A stack followed by a reduced-resolution page (NewSubfileType 1), which a reader
    # leaves out.
    a = phantom("uint16", rng)
    a.tofile(os.path.join(OUT, "uint16_thumb.bin"))
    name = "u16_with_thumbnail.tif"
    with tifffile.TiffWriter(os.path.join(OUT, name)) as tw:
        for z in range(NZ):
            tw.write(a[z], photometric="minisblack", metadata=None)
        tw.write(a[0, ::2, ::2].copy(), photometric="minisblack", subfiletype=1, metadata=None)
    add(name, "uint16", data="uint16_thumb.bin", pages=NZ, skipped=1)

    # ImageJ-style stacks as tifffile writes them (imagej=True): resolution in pixels per
    # micrometre with ResolutionUnit 1 (none), the unit and z spacing in the
    # description.
    for dtype in ["uint16", "float32"]:
        a = np.fromfile(os.path.join(OUT, dtype + ".bin"), np.dtype(dtype).newbyteorder("<")).reshape(NZ, NY, NX)
        name = f"{SHORT[dtype]}_imagej.tif"
        tifffile.imwrite(os.path.join(OUT, name), a, imagej=True, resolution=(1 / 0.65, 1 / 0.65),
                         metadata={"spacing": 2.0, "unit": "um", "axes": "ZYX"})
        with tifffile.TiffFile(os.path.join(OUT, name)) as tf:
            xn, xd = tf.pages[0].tags["XResolution"].value
            yn, yd = tf.pages[0].tags["YResolution"].value
        add(name, dtype, spacing=[1 / (xn / xd), 1 / (yn / yd), tf.imagej_metadata["spacing"]], unit="um")
    # An ImageJ hyperstack of two channels, which tripass must refuse rather than read
    # the channels as interleaved slices.
    a = np.zeros((2, 2, 6, 7), np.uint16)  # z, c, y, x
    tifffile.imwrite(os.path.join(OUT, "ij_two_channels.tif"), a, imagej=True, metadata={"axes": "ZCYX"})
    # OME-TIFF (tifffile's ome=True): physical sizes in the OME-XML description; a
    # two-channel file must be refused like the ImageJ one.
    a = np.fromfile(os.path.join(OUT, "uint16.bin"), "<u2").reshape(NZ, NY, NX)
    name = "u16_ome.tif"
    tifffile.imwrite(os.path.join(OUT, name), a, ome=True, rowsperstrip=7,
                     metadata={"axes": "ZYX", "PhysicalSizeX": 0.65, "PhysicalSizeY": 0.7,
                               "PhysicalSizeZ": 2.5, "PhysicalSizeZUnit": "µm"})
    add(name, "uint16", spacing=[0.65, 0.7, 2.5], unit="um")
    tifffile.imwrite(os.path.join(OUT, "ome_two_channels.tif"), np.zeros((3, 2, 6, 7), np.uint16),
                     ome=True, metadata={"axes": "ZCYX"})
    manifest["unsupported"] = [{"file": "ij_two_channels.tif", "error": "2 channels"},
                               {"file": "ome_two_channels.tif", "error": "2 channels"}]

    # A folder of single-page slices numbered without padding, so that name order
    # (slice_10 before slice_2) and number order differ.
    nz = 11
    f = np.zeros((nz, 7, 9), np.uint16)
    for z in range(nz):
        f[z] = (np.arange(63).reshape(7, 9) * 7 + 1000 * z).astype(np.uint16)
    f.tofile(os.path.join(OUT, "folder_natural.bin"))
    d = os.path.join(OUT, "folder_natural")
    os.makedirs(d)
    for z in range(nz):
        tifffile.imwrite(os.path.join(d, f"slice_{z + 1}.tif"), f[z], photometric="minisblack",
                         resolution=(10000 / 2.5, 10000 / 2.5), resolutionunit="CENTIMETER",
                         metadata=None)
    manifest["folders"] = [{"dir": "folder_natural", "data": "folder_natural.bin", "type": "uint16",
                            "size": [9, 7, nz], "spacing_um": 2.5}]

    with open(os.path.join(OUT, "manifest.json"), "w") as fh:
        # One fixture a line keeps the file small and its diffs readable.
        head = {k: v for k, v in manifest.items() if k != "fixtures"}
        fh.write(json.dumps(head)[:-1] + ', "fixtures": [\n')
        fh.write(",\n".join(json.dumps(e) for e in manifest["fixtures"]))
        fh.write("\n]}\n")
    with open(os.path.join(OUT, "README"), "w") as fh:
        fh.write("TIFF fixtures written by scripts/make_tiff_fixtures.py with tifffile %s and NumPy %s "
                 "(Debian 12) and rewritten by %s's tiffcp; <type>.bin hold the expected voxels "
                 "(raw little-endian, z, y, x), manifest.json what a reader must find in each file.\n"
                 % (tifffile.__version__, np.__version__, libtiff.replace("LIBTIFF, Version", "libtiff")))

    # Cross-check: libtiff converts every fixture back to uncompressed little-endian
    # strips, and tifffile's reading of that copy must equal the expected bytes.
    tmp = os.path.join(OUT, ".check.tif")
    for e in manifest["fixtures"]:
        tiffcp(["-c", "none", "-L", "-s"], os.path.join(OUT, e["file"]), tmp)
        with tifffile.TiffFile(tmp) as tf:
            got = np.stack([p.asarray() for p in tf.pages if not (p.subfiletype & 1)])
        want = np.fromfile(os.path.join(OUT, e["data"]), np.dtype(e["type"]).newbyteorder("<")).reshape(NZ, NY, NX)
        if got.tobytes() != want.astype(want.dtype.newbyteorder("=")).tobytes():
            sys.exit(f"{e['file']}: libtiff/tifffile read differs from the expected data")
    os.remove(tmp)
    print(f"wrote {len(manifest['fixtures'])} fixtures to {OUT}")


if __name__ == "__main__":
    main()
