// Package tensor holds small dense 3-way tensors (3D convolution kernels) and the
// decompositions that decide how cheaply a kernel can be applied: the higher-order SVD
// and its sequentially truncated variant, CP by alternating least squares, and the
// planner that picks the cheapest exact-enough form (direct, CP terms or Tucker) under a
// cost model in multiply-adds per voxel.
//
// The package knows nothing about files or volumes. Mode 1 of a kernel is x, mode 2 is
// y and mode 3 is z, and element (i, j, k) lies at Data[i + I*(j + J*k)].
package tensor
