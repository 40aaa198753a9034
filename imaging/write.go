package imaging

import (
	"context"
	"fmt"
	"image"
	"image/png"
	"io"
	"os"

	"ferry/outfile"
)

// WriteTIFF writes s as a classic little-endian multi-page TIFF: one
// uncompressed grey page (black is zero) of s.Bits bits per voxel page, each
// page in one strip. When s.Geometry knows the voxel size, it is recorded
// for other programs as ImageJ does: the lateral pixel size in the
// XResolution and YResolution tags (pixels per µm), and the unit, the
// section spacing and the origin in an ImageJ ImageDescription on page 0
// (see tiffwrite.go). The file appears whole or not at all: it is written
// to a temporary file in the same folder and renamed over path only when
// complete. It refuses to write over the file s was read from.
func WriteTIFF(path string, s *Stack) error { return WriteTIFFContext(context.Background(), path, s) }

// WriteTIFFContext is WriteTIFF with the run's context, whose output tracker
// (outfile) learns of the temporary file, so that a signal handler
// can remove it. The write is not cut short by a cancelled ctx: a caller
// checks for an interrupt before it starts.
func WriteTIFFContext(ctx context.Context, path string, s *Stack) error {
	if err := s.check(); err != nil {
		return err
	}
	if err := refuseOwnInput(path, s.Path); err != nil {
		return err
	}
	l := tiffLayout{width: s.Width, height: s.Height, depth: s.Depth, bits: s.Bits, geometry: s.Geometry}
	if err := l.check(path); err != nil {
		return err
	}
	return writeAtomic(ctx, path, func(w io.Writer) error {
		tw, err := newTIFFWriter(w, l)
		if err != nil {
			return err
		}
		for k := range s.Depth {
			if err := tw.writePage(s.PageData(k)); err != nil {
				return err
			}
		}
		return tw.finish()
	})
}

// WritePNG writes img as a PNG file: an image.Gray or image.Gray16 (a
// Stack's Image) as grey, an image.RGBA (an Overlay) as colour. Like
// WriteTIFF it writes whole or not at all.
func WritePNG(path string, img image.Image) error {
	return WritePNGContext(context.Background(), path, img)
}

// WritePNGContext is WritePNG with the run's context, as WriteTIFFContext.
func WritePNGContext(ctx context.Context, path string, img image.Image) error {
	if img == nil || img.Bounds().Empty() {
		return fmt.Errorf("imaging: %s: no image to write", path)
	}
	enc := png.Encoder{CompressionLevel: png.DefaultCompression}
	return writeAtomic(ctx, path, func(w io.Writer) error {
		return enc.Encode(w, img)
	})
}

// refuseOwnInput refuses to write path when it is the file input came from.
func refuseOwnInput(path, input string) error {
	if input == "" {
		return nil
	}
	out, err := os.Stat(path)
	if err != nil {
		return nil // nothing there yet: nothing to overwrite
	}
	in, err := os.Stat(input)
	if err == nil && os.SameFile(in, out) {
		return fmt.Errorf("imaging: %s: is the input the stack was read from; refusing to write over it", path)
	}
	return nil
}

// writeAtomic writes a file through fill, whole or not at all, by the one
// output path every ferry command takes (outfile), which buffers
// fill's writes. A write of an image takes well under a second, so it is not
// cancelled with ctx (a caller checks for an interrupt before it starts);
// ctx only carries the output tracker.
func writeAtomic(ctx context.Context, path string, fill func(io.Writer) error) error {
	return outfile.Write(context.WithoutCancel(ctx), path, fill)
}
