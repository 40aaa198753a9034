package imaging

import (
	"fmt"
	"image"
	"os"
	"path/filepath"
	"slices"
)

// Volume is an image stack opened for reading crops: only the pages (or a
// folder's plane files), and within a TIFF page only the strips or tiles,
// that a crop needs are read,
// so a stack larger than memory can be looked at piece by piece. It reads
// what ReadStack reads: a multi-page TIFF, a folder of single-plane TIFF
// and PNG files in natural name order, or one plane. A Volume is not safe
// for concurrent use.
type Volume struct {
	Width, Height, Depth int
	Bits                 int
	Path                 string
	// Geometry is what the file records of its voxel size and origin (a
	// folder's: its first plane's); see Settle.
	Geometry Geometry

	file  *os.File
	tiff  *tiffFile
	pages []tiffPage
	// planes are the files of a folder, in order; a lone PNG is one.
	planes []string
	dec    pageDecoder
}

// OpenVolume opens the stack at path for reading crops. Close releases it.
func OpenVolume(path string) (*Volume, error) {
	info, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("imaging: %w", err)
	}
	v := &Volume{Path: path}
	if info.IsDir() {
		s, names, err := folderPlanes(path)
		if err != nil {
			return nil, err
		}
		v.planes = names
		v.Width, v.Height, v.Depth, v.Bits, v.Geometry = s.Width, s.Height, len(names), s.Bits, s.Geometry
		return v, nil
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("imaging: %w", err)
	}
	head := make([]byte, 8)
	n, _ := f.ReadAt(head, 0)
	if n < 2 || !(string(head[:2]) == "II" || string(head[:2]) == "MM") {
		f.Close()
		// A PNG (or anything else) is read whole, as one plane.
		s, err := ReadPlane(path)
		if err != nil {
			return nil, err
		}
		v.planes = []string{path}
		v.Width, v.Height, v.Depth, v.Bits, v.Geometry = s.Width, s.Height, 1, s.Bits, s.Geometry
		return v, nil
	}
	tf, pages, err := openStackPages(f, info.Size(), path)
	if err != nil {
		f.Close()
		return nil, err
	}
	p0 := pages[0]
	v.file, v.tiff, v.pages = f, tf, pages
	v.Width, v.Height, v.Depth, v.Bits = p0.width, p0.height, len(pages), p0.bits
	v.Geometry = p0.calibration.geometry()
	return v, nil
}

// Header is the volume as a Stack without its voxels: its size, depth and
// recorded geometry, for Settle.
func (v *Volume) Header() *Stack {
	return &Stack{Width: v.Width, Height: v.Height, Depth: v.Depth, Bits: v.Bits, Path: v.Path, Geometry: v.Geometry}
}

// folderPlanes lists a folder's planes in natural order and reads the first
// for its size.
func folderPlanes(dir string) (*Stack, []string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, nil, fmt.Errorf("imaging: %w", err)
	}
	var names []string
	for _, e := range entries {
		if isPlaneName(e.Name()) && !e.IsDir() {
			names = append(names, e.Name())
		}
	}
	if len(names) == 0 {
		return nil, nil, fmt.Errorf("imaging: %s: the folder holds no .tif, .tiff or .png files", dir)
	}
	slices.SortFunc(names, naturalCompare)
	for i := range names {
		names[i] = filepath.Join(dir, names[i])
	}
	s, err := readFile(names[0], true)
	return s, names, err
}

// Close releases the file.
func (v *Volume) Close() error {
	if v.file != nil {
		return v.file.Close()
	}
	return nil
}

// Crop reads the voxels of the box from (x0, y0, z0) of size w × h × d,
// voxels outside the volume left 0, as a stack of that size.
func (v *Volume) Crop(x0, y0, z0, w, h, d int) (*Stack, error) {
	out, err := NewStack(w, h, d, v.Bits)
	if err != nil {
		return nil, err
	}
	out.Path = v.Path
	box := image.Rect(x0, y0, x0+w, y0+h)
	win := box.Intersect(image.Rect(0, 0, v.Width, v.Height))
	if win.Empty() {
		return out, nil
	}
	buf := make([]uint16, win.Dx()*win.Dy())
	for k := max(z0, 0); k < min(z0+d, v.Depth); k++ {
		clear(buf)
		if v.tiff != nil {
			colour, err := v.dec.decodeWindow(v.tiff, &v.pages[k], buf, win)
			if err != nil {
				return nil, err
			}
			out.Colour = out.Colour || colour
		} else if err := v.planeWindow(k, win, buf); err != nil {
			return nil, err
		}
		for j := win.Min.Y; j < win.Max.Y; j++ {
			copy(out.Data[out.Index(win.Min.X-x0, j-y0, k-z0):], buf[(j-win.Min.Y)*win.Dx():(j-win.Min.Y+1)*win.Dx()])
		}
	}
	return out, nil
}

// planeWindow reads the window win of plane k of a folder (or of a lone
// plane) into buf: of a TIFF plane only the strips or tiles that meet it, of
// a PNG the whole plane.
func (v *Volume) planeWindow(k int, win image.Rectangle, buf []uint16) error {
	path := v.planes[k]
	mismatch := func(w, h, bits int) error {
		return fmt.Errorf("imaging: %s: plane %d is %d × %d pixels of %d bits but the first is %d × %d pixels of %d bits; all planes of a stack must agree",
			path, k, w, h, bits, v.Width, v.Height, v.Bits)
	}
	f, err := os.Open(path)
	if err != nil {
		return fmt.Errorf("imaging: %w", err)
	}
	defer f.Close()
	info, err := f.Stat()
	if err != nil {
		return fmt.Errorf("imaging: %w", err)
	}
	head := make([]byte, 2)
	if n, _ := f.ReadAt(head, 0); n == 2 && (string(head) == "II" || string(head) == "MM") {
		tf, first, err := openTIFF(f, info.Size(), path)
		if err != nil {
			return err
		}
		pages, err := tf.pages(first)
		if err != nil {
			return err
		}
		if len(pages) != 1 {
			return fmt.Errorf("imaging: %s: holds %d pages where one plane was wanted", path, len(pages))
		}
		p := pages[0]
		if p.width != v.Width || p.height != v.Height || p.bits != v.Bits {
			return mismatch(p.width, p.height, p.bits)
		}
		_, err = v.dec.decodeWindow(tf, &p, buf, win)
		return err
	}
	p, err := readFile(path, true)
	if err != nil {
		return err
	}
	if p.Width != v.Width || p.Height != v.Height || p.Bits != v.Bits {
		return mismatch(p.Width, p.Height, p.Bits)
	}
	for j := win.Min.Y; j < win.Max.Y; j++ {
		copy(buf[(j-win.Min.Y)*win.Dx():], p.Data[j*p.Width+win.Min.X:j*p.Width+win.Max.X])
	}
	return nil
}
