// Package imaging reads, writes, resamples and overlays the image stacks of
// ferry: in vivo two-photon volumes on the source side, electron-microscopy
// planes on the target side.
//
// # Stacks
//
// A Stack holds grey voxels of 8 or 16 bits. Voxel (i, j, k) is column i,
// row j of page k, all counted from 0, and its centre lies at
// (i·vx, j·vy, k·vz) µm for the voxel size (vx, vy, vz) of its side, offset
// by an origin where one is recorded.
//
// Stack.Geometry holds what the file records of the voxel size and origin:
// ImageJ metadata (unit, spacing, origin) and TIFF resolution tags, read from
// page 0 (geometry.go). Settle decides a command's geometry from flags, the
// file and the transform file, in that order; PlaneGrid picks the plane a
// --target-z names and refuses pages a stack or a placed plane does not
// hold; NoOverlap explains an output that the stack does not reach, with
// the stack's box mapped through the transform (MappedBox). WriteTIFF
// records a known geometry as ImageJ does (tiffwrite.go).
//
// ReadStack reads a multi-page TIFF, a folder of single-plane TIFF and PNG
// files in natural name order (z2 before z10), or a single plane; ReadPlane
// reads one TIFF or PNG plane and converts colour to grey. WriteTIFF writes
// an uncompressed multi-page grey TIFF and WritePNG a grey plane or a colour
// overlay, both whole or not at all.
//
// The TIFF reader is this package's own: golang.org/x/image/tiff decodes the
// first page only, so the reader walks the chain of page directories itself
// and decodes strips and tiles with the same compressions (none, LZW,
// Deflate, PackBits, with or without the horizontal predictor), reusing
// x/image/tiff's LZW decoder. It checks every offset and size against the
// file length before it allocates, refuses BigTIFF and loops in the page
// chain with a message, and never lets the pages claim more bytes than the
// file holds (see tiff.go). The tests compare it with x/image/tiff on
// page 0 of every test file, and FuzzReadTIFF does so on random input.
//
// # Resampling
//
// Resample fills a plane of one space from a stack of the other through a
// transform.Transform: each output pixel's position is mapped (by Invert, or
// by Apply with ResampleOptions.Inverse) and the stack is sampled there by
// trilinear interpolation; positions outside the stack give 0 and are
// counted, and so are points where the map fails. Because a spline's
// inverse is a Newton iteration per point, the map is evaluated exactly on
// an adaptive grid that is refined until bilinear interpolation between its
// nodes is within ResampleOptions.ToleranceUM (0.05 µm by default) of the
// exact map at every cell's edge midpoints and centre, with a factor-of-two
// margin; the tests check the bound against exact evaluation at every pixel.
//
// # Overlays
//
// Overlay composes a target plane and a resampled source plane for the eye:
// each is stretched between its 0.5th and 99.5th percentile, coloured sky
// blue and orange from the Okabe–Ito palette for colour-blind readers, and
// added, so that structures present in both appear pale and those in one
// only keep its colour. Mapped cells are drawn as cut-corner diamonds
// coloured by status.
//
// # Test images
//
// testdata/images/make_images.py writes the test images with tifffile and
// Pillow, every voxel a known function of (i, j, k), and with --verify
// checks with tifffile that the files WriteTIFF wrote (go_written8.tif,
// go_written16.tif, kept byte for byte in step by TestGoldenFiles) read
// back as written.
package imaging
