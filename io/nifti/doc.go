// Package nifti reads and writes NIfTI-1 volumes (the format of the NIfTI Data Format
// Working Group, nifti1.h), single-file .nii and gzip-compressed .nii.gz, slice by
// slice.
//
// Open reads and checks the 348-byte header (in either byte order) and returns a
// Reader, a volume.Source that yields z-slices in order. A .nii.gz is read as a stream
// through compress/gzip, never inflated whole into memory; seeking in it decompresses
// up to the slice sought, while a .nii seeks directly. Create returns a Writer, a
// volume.Sink that writes a little-endian .nii, or streams a .nii.gz through gzip,
// // under a temporary name and renames it on Close. The .nii.gz output is compressed on
// every core, in independent chunks joined into a single gzip member, so it stays a
// plain gzip file that any reader takes.
//
// What tripass takes from the header:
//
//   - dim: NX, NY, NZ = dim[1..3] (1 for axes beyond dim[0]). tripass filters 3D
//     volumes: Open refuses a file with more than one volume (dim[0] ≥ 4 and
//     dim[4..] > 1, a time series) with an UnsupportedError that says so, and
//     OpenVolume reads any one volume of such a series as a 3D volume, so that a
//     caller can process the series volume by volume. dim[4] = 1 is a 3D volume.
//   - datatype and bitpix, which must agree: uint8, int16, uint16, int32, uint32,
//     float32 and float64 are delivered as the sample type of the same name; int8,
//     which tripass has no sample type for, is delivered as int16 (exactly). Complex,
//     RGB and 64-bit integer data are refused.
//   - pixdim[1..3] as the spacing, in the unit of xyzt_units (1 m, 2 mm, 3 µm →
//     Header.Unit "m", "mm", "um"; 0, unknown, → "", spacing in voxels).
//   - vox_offset, where the data start (at least 352 in a .nii; extensions before it
//     are skipped).
//   - scl_slope and scl_inter: when the slope is finite and not 0 and the pair is not
//     the identity (1, 0), the Reader applies them, value = slope·stored + inter, and
//     delivers float32 (float64 for float64 data), as nibabel's get_fdata does; see
//     Reader.Scaling.
//   - the qform (qform_code, quatern_b/c/d, qoffset_x/y/z, pixdim[0] = qfac) and sform
//     (sform_code, srow_x/y/z), kept exactly as stored in an Orientation so that an
//     output can carry its input's placement unchanged; and the descrip text.
//
// Everything read from the header is checked before it is used: sizes are bounded
// (volume.Header.Validate) and compared with the file's size (for .nii.gz, with the
// most that deflate can expand the file to) before anything is allocated, so a
// hostile header fails at once. A truncated file or gzip stream is a *FormatError
// wrapping io.ErrUnexpectedEOF; a gzip checksum is verified with the last slice.
package nifti
