// Package preview draws pictures of volumes and kernels for people to look at.
//
// A volume preview shows three orthogonal sections through one voxel: the xy section at
// that voxel's z, the xz section at its y and the yz section at its x. ReadSections
// collects them from a volume.Source in one streaming pass (or, for the xy section
// alone, by seeking to its slice), so a preview of a stack of any depth needs memory
// for three planes only. Render lays the sections of one or more stacks out in one
// grey-scale image: one column per stack, the three sections one above the other, each
// resampled to square physical pixels so that anisotropic voxels keep their true
// shape, with a contrast window taken from percentiles of the sections' values and a
// scale bar of a round physical length.
//
// A kernel figure (WriteKernelPlot) shows, beside each other, the n-mode singular
// values of a 3D kernel along each axis on a log scale and the relative error against
// the cost of each candidate plan, with the chosen plan marked. The package knows
// nothing about how the planner finds those numbers; the command fills a KernelFigure.
package preview
