// Package hull approximates the convex hull of a point cloud from outside by
// its support planes in a fixed set of directions. Mapping uses it to tell
// when a cell lies outside the landmarks (extrapolated), matching to tell how
// deep a cell lies inside the volume in which candidates were looked for.
//
// A polytope of support planes is always convex and contains the points; with
// 642 evenly spread directions in 3-D (160 in 2-D), plus the coordinate axes
// and the cloud's principal axes, it exceeds the true hull by a thin margin
// near its edges only.
package hull
