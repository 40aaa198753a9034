package imaging

import (
	"fmt"
	"image"
	"math"
)

// Stack is a grey image stack: Depth pages of Width × Height voxels.
//
// Voxel (i, j, k) is column i, row j of page k, all counted from 0; it is
// stored at Data[(k·Height + j)·Width + i]. Samples are held as uint16 for
// both bit depths; an 8-bit stack holds values 0–255 only.
type Stack struct {
	Width, Height, Depth int
	// Bits is 8 or 16: the bit depth of the file it came from, and of any
	// file written from it.
	Bits int
	Data []uint16
	// Path is the file or folder it was read from, empty for a stack made
	// in memory. Error messages and the writers' self-overwrite guard use it.
	Path string
	// Colour reports that at least one plane was stored in colour and was
	// converted to grey when read (see ReadPlane).
	Colour bool
	// Geometry is what the file records of the voxel size and origin
	// (ImageJ metadata, TIFF resolution tags), or what the maker of a
	// stack in memory set; WriteTIFF records it. Its zero value records
	// nothing.
	Geometry Geometry
}

// NewStack returns a zeroed stack of the given size and bit depth.
func NewStack(width, height, depth, bits int) (*Stack, error) {
	if bits != 8 && bits != 16 {
		return nil, fmt.Errorf("imaging: %d-bit stack: want 8 or 16 bits", bits)
	}
	n, err := voxelCount(width, height, depth)
	if err != nil {
		return nil, fmt.Errorf("imaging: new stack: %w", err)
	}
	return &Stack{Width: width, Height: height, Depth: depth, Bits: bits, Data: make([]uint16, n)}, nil
}

// voxelCount is width·height·depth, refusing sizes that are not positive or
// whose product would not fit in an int.
func voxelCount(width, height, depth int) (int, error) {
	if width < 1 || height < 1 || depth < 1 {
		return 0, fmt.Errorf("size %d × %d × %d voxels: every side must be at least 1", width, height, depth)
	}
	n := uint64(width) * uint64(height)
	if width > math.MaxInt32 || height > math.MaxInt32 || n > math.MaxInt/uint64(depth)/2 {
		return 0, fmt.Errorf("size %d × %d × %d voxels is too large", width, height, depth)
	}
	return int(n) * depth, nil
}

// MaxValue is the largest sample value of the stack's bit depth.
func (s *Stack) MaxValue() uint16 {
	if s.Bits == 8 {
		return 0xff
	}
	return 0xffff
}

// Index is the position of voxel (i, j, k) in Data.
func (s *Stack) Index(i, j, k int) int { return (k*s.Height+j)*s.Width + i }

// At is the value of voxel (i, j, k); it is 0 outside the stack.
func (s *Stack) At(i, j, k int) uint16 {
	if i < 0 || j < 0 || k < 0 || i >= s.Width || j >= s.Height || k >= s.Depth {
		return 0
	}
	return s.Data[s.Index(i, j, k)]
}

// Set sets voxel (i, j, k), clamping v to the bit depth. It does nothing
// outside the stack.
func (s *Stack) Set(i, j, k int, v uint16) {
	if i < 0 || j < 0 || k < 0 || i >= s.Width || j >= s.Height || k >= s.Depth {
		return
	}
	s.Data[s.Index(i, j, k)] = min(v, s.MaxValue())
}

// PageData is the slice of Data holding page k (not a copy).
func (s *Stack) PageData(k int) []uint16 {
	n := s.Width * s.Height
	return s.Data[k*n : (k+1)*n]
}

// Page returns page k as a stack of depth 1 sharing s's data.
func (s *Stack) Page(k int) (*Stack, error) {
	if k < 0 || k >= s.Depth {
		return nil, fmt.Errorf("imaging: %s: page %d: the stack has pages 0 to %d", s.name(), k, s.Depth-1)
	}
	p := *s
	p.Depth = 1
	p.Data = s.PageData(k)
	p.Geometry.OriginUM[2] += float64(k) * p.Geometry.VoxelUM[2]
	return &p, nil
}

// Image returns page k as an image.Gray (8-bit stacks) or image.Gray16,
// copying the samples, ready for image/png; nil when k is out of range.
func (s *Stack) Image(k int) image.Image {
	if k < 0 || k >= s.Depth {
		return nil
	}
	r := image.Rect(0, 0, s.Width, s.Height)
	page := s.PageData(k)
	if s.Bits == 8 {
		img := image.NewGray(r)
		for j := range s.Height {
			row := page[j*s.Width : (j+1)*s.Width]
			pix := img.Pix[j*img.Stride:]
			for i, v := range row {
				pix[i] = uint8(v)
			}
		}
		return img
	}
	img := image.NewGray16(r)
	for j := range s.Height {
		row := page[j*s.Width : (j+1)*s.Width]
		pix := img.Pix[j*img.Stride:]
		for i, v := range row {
			pix[2*i] = uint8(v >> 8)
			pix[2*i+1] = uint8(v)
		}
	}
	return img
}

// name is the stack's path for messages.
func (s *Stack) name() string {
	if s.Path == "" {
		return "stack in memory"
	}
	return s.Path
}

// check reports whether the stack's fields agree with each other.
func (s *Stack) check() error {
	if s == nil {
		return fmt.Errorf("imaging: no stack")
	}
	if s.Bits != 8 && s.Bits != 16 {
		return fmt.Errorf("imaging: %s: %d bits: want 8 or 16", s.name(), s.Bits)
	}
	n, err := voxelCount(s.Width, s.Height, s.Depth)
	if err != nil {
		return fmt.Errorf("imaging: %s: %w", s.name(), err)
	}
	if len(s.Data) != n {
		return fmt.Errorf("imaging: %s: %d samples for %d × %d × %d voxels", s.name(), len(s.Data), s.Width, s.Height, s.Depth)
	}
	return nil
}
