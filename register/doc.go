// Package register does the job ferry exists for: it chooses the transform
// model and its smoothing by exact leave-one-out, flags landmarks that look
// wrong, estimates how precisely landmarks were picked, calibrates the
// uncertainty of mapped positions, maps cells with their 95 % radii and
// statuses, and matches them to candidates in the target volume.
//
// Its sub-packages hold the parts that grew: outfile (whole-or-nothing
// outputs), simulate (synthetic scenarios with known truth) and imaging
// (image stacks, resampling and overlays).
package register
