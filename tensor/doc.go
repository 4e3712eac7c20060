// Package tensor holds small dense 3-way tensors (3D convolution kernels) and the
// decompositions that decide how cheaply a kernel can be applied: the higher-order SVD
// and its sequentially truncated variant, CP by alternating least squares, and the
// planner that picks the cheapest exact-enough form (direct, CP terms or Tucker) under a
// cost model in multiply-adds per voxel.
//
// The package knows nothing about files or volumes. Mode 1 of a kernel is x, mode 2 is
// y and mode 3 is z, and element (i, j, k) lies at Data[i + I*(j + J*k)]. Functions that
// take a mode number (Unfold, Fold, ModeProduct) count from 0, as Go indexes do: 0 is x,
// 1 is y, 2 is z; arrays indexed by mode ([3]int ranks, [3][]float64 spectra) likewise.
//
// How the parts fit: HOSVD gives the n-mode singular values and the multilinear rank;
// STHOSVD and truncations of HOSVD give Tucker forms within a tolerance; CPALS gives
// sums of separable terms and flags degenerate fits; Analyze tries them all, measures
// each candidate's true error from its Plan, and picks the cheapest Plan within the
// tolerance under the cost model of Plan.Macs.
package tensor
