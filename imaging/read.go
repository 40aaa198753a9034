package imaging

import (
	"bytes"
	"cmp"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
)

// pngSignature is the first eight bytes of every PNG file; a TIFF file
// starts with II or MM.
var pngSignature = []byte("\x89PNG\r\n\x1a\n")

// ReadStack reads an image stack from a multi-page TIFF file, from a folder
// of single-plane TIFF and PNG files taken in natural name order (see
// below), or from a single plane (a stack of depth 1).
//
// TIFF files must be classic (not BigTIFF) with 8- or 16-bit unsigned
// samples, uncompressed or compressed with LZW, Deflate or PackBits, in
// strips or tiles; every page must have the same size and bit depth.
// White-is-zero grey is inverted so that larger values are brighter, and
// colour is converted to grey as ReadPlane describes.
//
// In a folder, the files whose names end in .tif, .tiff or .png (any case)
// are the planes; other files, subfolders and names starting with a dot are
// skipped. Names are sorted in natural order: runs of digits compare as
// numbers, so z2 comes before z10; names that tie (z01 and z1) fall back to
// byte order. Each file must hold one plane, and all must share size and
// bit depth; the error names the first file that does not.
//
// Every error names the file, and the page (counted from 0) where it applies.
func ReadStack(path string) (*Stack, error) {
	info, err := os.Stat(path)
	if err != nil {
		return nil, openError(path, err)
	}
	if info.IsDir() {
		return readFolder(path)
	}
	return readFile(path, false)
}

// ReadPlane reads one plane (a stack of depth 1) from a TIFF or PNG file.
// A TIFF of more than one page is refused.
//
// Colour images are converted to grey, not refused: the grey value is the
// luma 0.299 R + 0.587 G + 0.114 B (ITU-R BT.601 weights) of the stored
// channel values, at the file's bit depth, and the alpha channel is
// ignored. Stack.Colour then reports that some pixel had channels that
// differ.
func ReadPlane(path string) (*Stack, error) {
	info, err := os.Stat(path)
	if err != nil {
		return nil, openError(path, err)
	}
	if info.IsDir() {
		return nil, fmt.Errorf("%s: is a folder; want one TIFF or PNG plane", path)
	}
	return readFile(path, true)
}

// readFile reads a TIFF or PNG file, told apart by their first bytes.
func readFile(path string, onePlane bool) (*Stack, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, openError(path, err)
	}
	defer f.Close()
	info, err := f.Stat()
	if err != nil {
		return nil, openError(path, err)
	}
	s, err := decode(f, info.Size(), path, onePlane)
	if err != nil {
		return nil, err
	}
	s.Path = path
	return s, nil
}

// decode reads a TIFF or PNG image of size bytes from r.
func decode(r io.ReaderAt, size int64, name string, onePlane bool) (*Stack, error) {
	head := make([]byte, 8)
	n, _ := r.ReadAt(head, 0)
	head = head[:n]
	switch {
	case bytes.HasPrefix(head, []byte("II")), bytes.HasPrefix(head, []byte("MM")):
		return readTIFF(r, size, name, onePlane)
	case bytes.HasPrefix(head, pngSignature):
		return readPNG(r, size, name)
	}
	return nil, fmt.Errorf("%s: neither a TIFF nor a PNG file", name)
}

// readPNG reads a PNG plane. Its size is checked against the file length
// before the pixels are allocated: Deflate cannot expand one byte into more
// than about a thousand.
func readPNG(r io.ReaderAt, size int64, name string) (*Stack, error) {
	cfg, err := png.DecodeConfig(io.NewSectionReader(r, 0, size))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	bits := 8
	switch cfg.ColorModel {
	case color.Gray16Model, color.RGBA64Model, color.NRGBA64Model:
		bits = 16
	}
	if cfg.Width < 1 || cfg.Height < 1 {
		return nil, fmt.Errorf("%s: size %d × %d pixels: want at least 1 × 1", name, cfg.Width, cfg.Height)
	}
	if int64(cfg.Width)*int64(cfg.Height) > maxExpansion*size+1024 {
		return nil, fmt.Errorf("%s: %d × %d pixels cannot be held in %d bytes; the file is damaged", name, cfg.Width, cfg.Height, size)
	}
	img, err := png.Decode(io.NewSectionReader(r, 0, size))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	s := &Stack{Width: cfg.Width, Height: cfg.Height, Depth: 1, Bits: bits, Path: name}
	s.Data, s.Colour = greyPixels(img, bits)
	return s, nil
}

// greyPixels copies img into grey samples of the given depth, converting
// colour with luma, and reports whether any pixel had unequal channels.
func greyPixels(img image.Image, bits int) ([]uint16, bool) {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	data := make([]uint16, w*h)
	switch m := img.(type) {
	case *image.Gray:
		for y := range h {
			row := m.Pix[y*m.Stride:]
			for x := range w {
				data[y*w+x] = uint16(row[x])
			}
		}
		return data, false
	case *image.Gray16:
		for y := range h {
			row := m.Pix[y*m.Stride:]
			for x := range w {
				data[y*w+x] = uint16(row[2*x])<<8 | uint16(row[2*x+1])
			}
		}
		return data, false
	}
	colour := false
	for y := range h {
		for x := range w {
			c := color.NRGBA64Model.Convert(img.At(b.Min.X+x, b.Min.Y+y)).(color.NRGBA64)
			if c.R != c.G || c.G != c.B {
				colour = true
			}
			data[y*w+x] = luma(uint32(c.R), uint32(c.G), uint32(c.B), bits)
		}
	}
	return data, colour
}

// isPlaneName reports whether a folder entry's name marks it as a plane.
func isPlaneName(name string) bool {
	if strings.HasPrefix(name, ".") {
		return false
	}
	switch strings.ToLower(filepath.Ext(name)) {
	case ".tif", ".tiff", ".png":
		return true
	}
	return false
}

// readFolder reads the planes of a folder in natural name order.
func readFolder(dir string) (*Stack, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, openError(dir, err)
	}
	var names []string
	for _, e := range entries {
		if !isPlaneName(e.Name()) {
			continue
		}
		if e.Type()&os.ModeSymlink != 0 {
			info, err := os.Stat(filepath.Join(dir, e.Name()))
			if err != nil || !info.Mode().IsRegular() {
				continue
			}
		} else if !e.Type().IsRegular() {
			continue
		}
		names = append(names, e.Name())
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("%s: the folder holds no .tif, .tiff or .png files", dir)
	}
	slices.SortFunc(names, naturalCompare)
	var s *Stack
	for k, name := range names {
		path := filepath.Join(dir, name)
		p, err := readFile(path, true)
		if err != nil {
			return nil, err
		}
		if s == nil {
			n, err := voxelCount(p.Width, p.Height, len(names))
			if err != nil {
				return nil, fmt.Errorf("%s: %w", dir, err)
			}
			s = &Stack{Width: p.Width, Height: p.Height, Depth: len(names), Bits: p.Bits, Path: dir, Geometry: p.Geometry}
			// The planes' names order them; where the folder starts in z
			// no single plane can say.
			s.Geometry.HasOrigin[2] = false
			s.Geometry.OriginUM[2] = 0
			s.Data = make([]uint16, 0, n)
		} else if p.Width != s.Width || p.Height != s.Height || p.Bits != s.Bits {
			return nil, fmt.Errorf("%s: plane %d is %d × %d pixels of %d bits but %s is %d × %d pixels of %d bits; all planes of a stack must agree",
				path, k, p.Width, p.Height, p.Bits, names[0], s.Width, s.Height, s.Bits)
		}
		s.Data = append(s.Data, p.Data...)
		s.Colour = s.Colour || p.Colour
	}
	return s, nil
}

// naturalCompare orders names so that runs of decimal digits compare by
// their numeric value ("z2" < "z10"), everything else byte by byte; names
// equal in that order compare byte by byte so that the order is total.
func naturalCompare(a, b string) int {
	i, j := 0, 0
	for i < len(a) && j < len(b) {
		ca, cb := a[i], b[j]
		if isDigit(ca) && isDigit(cb) {
			ei, ej := i, j
			for ei < len(a) && isDigit(a[ei]) {
				ei++
			}
			for ej < len(b) && isDigit(b[ej]) {
				ej++
			}
			na := strings.TrimLeft(a[i:ei], "0")
			nb := strings.TrimLeft(b[j:ej], "0")
			if len(na) != len(nb) {
				return cmp.Compare(len(na), len(nb))
			}
			if c := strings.Compare(na, nb); c != 0 {
				return c
			}
			i, j = ei, ej
			continue
		}
		if ca != cb {
			return cmp.Compare(int(ca), int(cb))
		}
		i++
		j++
	}
	if c := cmp.Compare(len(a)-i, len(b)-j); c != 0 {
		return c
	}
	return strings.Compare(a, b)
}

func isDigit(c byte) bool { return '0' <= c && c <= '9' }

// openError says that the file at path could not be opened, as the other
// input readers say it: the path first, then the reason without the
// system call's name.
func openError(path string, err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		err = pe.Err
	}
	return fmt.Errorf("%s: cannot open: %w", path, err)
}
