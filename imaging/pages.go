package imaging

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
)

// Pages is a stack read one page at a time, so that a stack larger than
// memory can be warped: a multi-page TIFF decodes page k when asked, a
// folder reads its k-th plane, a stack in memory hands out its own pages.
type Pages interface {
	// Header is the stack without its voxels: size, bit depth, path and
	// the geometry its file records (Data is nil).
	Header() *Stack
	// ReadPage decodes page k into dst (Width·Height samples).
	ReadPage(k int, dst []uint16) error
	Close() error
}

// OpenPages opens a stack for reading page by page: a multi-page TIFF, a
// folder of single-plane files in natural name order, or one plane, with
// the checks of ReadStack. A TIFF's page directories are all read and
// checked at once; the pixels wait until asked for.
func OpenPages(path string) (Pages, error) {
	info, err := os.Stat(path)
	if err != nil {
		return nil, openError(path, err)
	}
	if info.IsDir() {
		return openFolderPages(path)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, openError(path, err)
	}
	head := make([]byte, 8)
	n, _ := f.ReadAt(head, 0)
	if n < 2 || (string(head[:2]) != "II" && string(head[:2]) != "MM") {
		f.Close()
		s, err := ReadStack(path) // a PNG plane
		if err != nil {
			return nil, err
		}
		return MemoryPages(s), nil
	}
	t, pages, err := openStackPages(f, info.Size(), path)
	if err != nil {
		f.Close()
		return nil, err
	}
	p0 := pages[0]
	if _, err := voxelCount(p0.width, p0.height, len(pages)); err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	h := &Stack{Width: p0.width, Height: p0.height, Depth: len(pages), Bits: p0.bits, Path: path, Geometry: p0.calibration.geometry()}
	return &tiffPages{file: f, tiff: t, pages: pages, header: h}, nil
}

type tiffPages struct {
	file   *os.File
	tiff   *tiffFile
	pages  []tiffPage
	header *Stack
	dec    pageDecoder
}

func (p *tiffPages) Header() *Stack { return p.header }
func (p *tiffPages) Close() error   { return p.file.Close() }

func (p *tiffPages) ReadPage(k int, dst []uint16) error {
	if k < 0 || k >= len(p.pages) {
		return fmt.Errorf("%s: page %d: the stack has pages 0 to %d", p.header.Path, k, len(p.pages)-1)
	}
	_, err := p.dec.decode(p.tiff, &p.pages[k], dst)
	return err
}

type folderPages struct {
	dir    string
	names  []string
	header *Stack
}

// StackFiles are the files a stack is read from: path itself, or for a
// folder its .tif, .tiff and .png files in natural name order (the pages'
// order), so that a caller can record what the stack was made of.
func StackFiles(path string) ([]string, error) {
	info, err := os.Stat(path)
	if err != nil {
		return nil, openError(path, err)
	}
	if !info.IsDir() {
		return []string{path}, nil
	}
	names, err := planeNames(path)
	if err != nil {
		return nil, err
	}
	files := make([]string, len(names))
	for i, n := range names {
		files[i] = filepath.Join(path, n)
	}
	return files, nil
}

// planeNames are the names of a folder's plane files in natural order.
func planeNames(dir string) ([]string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		return nil, openError(dir, err)
	}
	var names []string
	for _, e := range entries {
		if isPlaneName(e.Name()) {
			if info, err := os.Stat(filepath.Join(dir, e.Name())); err == nil && info.Mode().IsRegular() {
				names = append(names, e.Name())
			}
		}
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("%s: the folder holds no .tif, .tiff or .png files", dir)
	}
	slices.SortFunc(names, naturalCompare)
	return names, nil
}

func openFolderPages(dir string) (Pages, error) {
	names, err := planeNames(dir)
	if err != nil {
		return nil, err
	}
	p0, err := readFile(filepath.Join(dir, names[0]), true)
	if err != nil {
		return nil, err
	}
	if _, err := voxelCount(p0.Width, p0.Height, len(names)); err != nil {
		return nil, fmt.Errorf("%s: %w", dir, err)
	}
	h := &Stack{Width: p0.Width, Height: p0.Height, Depth: len(names), Bits: p0.Bits, Path: dir, Geometry: p0.Geometry}
	h.Geometry.HasOrigin[2], h.Geometry.OriginUM[2] = false, 0
	return &folderPages{dir: dir, names: names, header: h}, nil
}

func (p *folderPages) Header() *Stack { return p.header }
func (p *folderPages) Close() error   { return nil }

func (p *folderPages) ReadPage(k int, dst []uint16) error {
	if k < 0 || k >= len(p.names) {
		return fmt.Errorf("%s: page %d: the stack has pages 0 to %d", p.dir, k, len(p.names)-1)
	}
	path := filepath.Join(p.dir, p.names[k])
	s, err := readFile(path, true)
	if err != nil {
		return err
	}
	h := p.header
	if s.Width != h.Width || s.Height != h.Height || s.Bits != h.Bits {
		return fmt.Errorf("%s: plane %d is %d × %d pixels of %d bits but %s is %d × %d pixels of %d bits; all planes of a stack must agree",
			path, k, s.Width, s.Height, s.Bits, p.names[0], h.Width, h.Height, h.Bits)
	}
	copy(dst, s.Data)
	return nil
}

// MemoryPages hands out the pages of a stack in memory.
func MemoryPages(s *Stack) Pages { return memoryPages{s} }

type memoryPages struct{ s *Stack }

func (m memoryPages) Header() *Stack {
	h := *m.s
	h.Data = nil
	return &h
}
func (m memoryPages) Close() error { return nil }
func (m memoryPages) ReadPage(k int, dst []uint16) error {
	if k < 0 || k >= m.s.Depth {
		return fmt.Errorf("%s: page %d: the stack has pages 0 to %d", m.s.name(), k, m.s.Depth-1)
	}
	copy(dst, m.s.PageData(k))
	return nil
}

// openStackPages reads the directories of the TIFF stack in r and checks
// that its pages agree in size and depth, as every page of a stack must.
func openStackPages(r io.ReaderAt, size int64, path string) (*tiffFile, []tiffPage, error) {
	t, first, err := openTIFF(r, size, path)
	if err != nil {
		return nil, nil, err
	}
	pages, err := t.pages(first)
	if err != nil {
		return nil, nil, err
	}
	p0 := pages[0]
	for _, p := range pages[1:] {
		if p.width != p0.width || p.height != p0.height || p.bits != p0.bits {
			return nil, nil, t.pageError(p.index, "is %d × %d pixels of %d bits but page 0 is %d × %d pixels of %d bits; all pages of a stack must agree",
				p.width, p.height, p.bits, p0.width, p0.height, p0.bits)
		}
	}
	return t, pages, nil
}
