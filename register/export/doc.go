// Package export writes a fitted transform in forms other programs read:
// its affine part as a 4×4 homogeneous matrix (plain text and JSON), and,
// for a thin-plate spline, a displacement field sampled on a regular grid
// over the source extent, as a float32 multi-page TIFF and as an OME-Zarr
// store whose metadata follow the OME-NGFF 0.6 coordinate transformations
// (a `sequence` of `displacements` and `affine`). It reports how far the
// interpolated field strays from the spline (the sampling error), and
// writes mapped cells as a target-voxel point list for viewers' point
// annotations.
//
// Convention everywhere: the input is the source (in vivo) side, the
// output the target (EM) side, points are column vectors, x' = A·x + t.
package export
