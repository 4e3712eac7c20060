// Package npy reads and writes NumPy's .npy array files (NEP 1, "A simple file format
// for NumPy arrays", and numpy.lib.format), the form in which users bring kernels
// designed in NumPy.
//
// A file is the magic string "\x93NUMPY", a major and minor version byte, the header
// length (a little-endian uint16 in version 1.0, uint32 in 2.0 and 3.0), and a header:
// a Python dict literal such as
//
//	{'descr': '<f8', 'fortran_order': False, 'shape': (5, 5, 5), }
//
// padded with spaces and ended by '\n' so that the data starts on a 64-byte boundary.
// The data follow as the raw elements in C (last index fastest) or Fortran (first index
// fastest) order.
//
// Read accepts float32 and float64 in either byte order, and also float16 and the
// integer and boolean dtypes, converting every element to float64 in C order (exactly,
// except for 64-bit integers beyond 2⁵³). Write writes float64
// or float32, little-endian, C order, version 1.0 (2.0 if the header would not fit),
// with the same header bytes numpy.save writes.
//
// The package knows nothing of kernels or volumes: an Array is a shape and values.
package npy
