package imaging

import (
	"bytes"
	"encoding/binary"
	"hash/crc32"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzDecodeHeaders feeds arbitrary bytes to the reader's first steps, the
// sniffing of TIFF and PNG by their first bytes and the PNG header (IHDR)
// read before any pixel is allocated, with PNG seeds from testdata and
// headers that claim huge sizes. None may panic; every error names the file
// on one line; every plane returned is consistent, one page, and holds no
// more pixels than the allocation bound allows for its bytes.
func FuzzDecodeHeaders(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join(testdata, "*.png"))
	for _, file := range files {
		if b, err := os.ReadFile(file); err == nil {
			f.Add(b)
		}
	}
	for _, size := range [][2]uint32{{1, 1}, {1 << 20, 1 << 20}, {0, 5}, {1 << 31, 1}} {
		f.Add(pngHeaderOnly(size[0], size[1]))
	}
	f.Add([]byte("II*\x00"))
	f.Add([]byte("MM\x00*"))
	f.Add([]byte("\x89PN"))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := decode(bytes.NewReader(data), int64(len(data)), "fuzz.img", true)
		if err != nil {
			if !strings.Contains(err.Error(), "fuzz.img") || strings.Contains(err.Error(), "\n") {
				t.Fatalf("error %q: want one line naming the file", err)
			}
			return
		}
		if err := s.check(); err != nil {
			t.Fatal(err)
		}
		if s.Depth != 1 {
			t.Fatalf("a plane of %d pages", s.Depth)
		}
		if len(s.Data) > maxExpansion*len(data)+1024 {
			t.Fatalf("%d pixels from %d bytes", len(s.Data), len(data))
		}
	})
}

// pngHeaderOnly is the signature and an IHDR chunk of an 8-bit grey image of
// the size given, with a correct checksum, and nothing after it.
func pngHeaderOnly(w, h uint32) []byte {
	var b bytes.Buffer
	b.Write(pngSignature)
	ihdr := make([]byte, 13)
	binary.BigEndian.PutUint32(ihdr[0:], w)
	binary.BigEndian.PutUint32(ihdr[4:], h)
	ihdr[8] = 8 // bits
	chunk := append([]byte("IHDR"), ihdr...)
	binary.Write(&b, binary.BigEndian, uint32(len(ihdr)))
	b.Write(chunk)
	binary.Write(&b, binary.BigEndian, crc32.ChecksumIEEE(chunk))
	return b.Bytes()
}
