// Package transform holds the geometry of ferry: transform models between a
// source and a target space, their fitting from point pairs, their exact
// leave-one-out errors, application to points and batches, Jacobians,
// inverses, chains, and the versioned transform file.
//
// It knows nothing of CSV files, cells or electron microscopy: it sees points
// in micrometres and, optionally, a weight per pair.
//
// Every position is a Vec of three coordinates. A 2-D transform reads and
// writes only X and Y and leaves Z untouched at zero, and its Jacobian has a
// one in the Z-Z place, so that a determinant or an inverse means the same in
// 2-D and 3-D.
package transform
