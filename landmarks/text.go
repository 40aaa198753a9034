package landmarks

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"fmt"
	"hash"
	"io"
	"unicode/utf8"
)

// textReader passes a file's bytes on to the CSV reader once it has made sure
// they are text: UTF-8 without NUL bytes. It drops a leading byte-order mark,
// hashes the raw bytes as they go past and counts lines so that a fault can
// be placed. encoding/csv passes invalid UTF-8 through untouched, and a
// binary file given by mistake would otherwise surface as a puzzling complaint
// about quotes or field counts.
type textReader struct {
	name string
	src  *bufio.Reader
	sum  hash.Hash
	// line is the 1-based line of the next byte to be checked.
	line int
	// carry holds the first bytes of a character split across two reads.
	carry  [utf8.UTFMax]byte
	nCarry int
	err    error
	// bom is the length of the byte-order mark dropped, 3 or 0.
	bom int
}

// newTextReader returns a textReader over r, or an *InputError when r is
// empty or starts with a UTF-16 byte-order mark.
func newTextReader(name string, r io.Reader) (*textReader, error) {
	sum := sha256.New()
	t := &textReader{
		name: name,
		src:  bufio.NewReaderSize(io.TeeReader(r, sum), 64<<10),
		sum:  sum,
		line: 1,
	}
	head, err := t.src.Peek(3)
	if len(head) == 0 {
		if err != nil && err != io.EOF {
			return nil, &InputError{File: name, Msg: "cannot read: " + ioMessage(err)}
		}
		return nil, &InputError{File: name, Msg: "empty file: want a CSV table with a header row naming the columns"}
	}
	switch {
	case bytes.HasPrefix(head, []byte{0xEF, 0xBB, 0xBF}):
		t.src.Discard(3)
		t.bom = 3
		if _, err := t.src.Peek(1); err == io.EOF {
			return nil, &InputError{File: name, Msg: "empty file (nothing but a byte-order mark): want a CSV table with a header row naming the columns"}
		}
	case bytes.HasPrefix(head, []byte{0xFF, 0xFE}), bytes.HasPrefix(head, []byte{0xFE, 0xFF}):
		return nil, &InputError{File: name, Line: 1, Msg: "not UTF-8 text: the file is UTF-16 (it starts with a UTF-16 byte-order mark); save it as UTF-8"}
	}
	return t, nil
}

// SHA256 is the hex SHA-256 of the raw bytes read so far, byte-order mark
// included; after the CSV reader has met the end of the file it is that of
// the whole file.
func (t *textReader) SHA256() string { return fmt.Sprintf("%x", t.sum.Sum(nil)) }

func (t *textReader) Read(p []byte) (int, error) {
	if t.err != nil {
		return 0, t.err
	}
	n, err := t.src.Read(p)
	good, bad := t.check(p[:n])
	if bad != nil {
		t.err = bad
		return good, bad
	}
	if err == io.EOF && t.nCarry > 0 {
		t.err = t.invalid(t.carry[0])
		return n, t.err
	}
	return n, err
}

// check vets b, the next bytes of the file, and returns how many of them are
// sound and, when some are not, the fault.
func (t *textReader) check(b []byte) (int, *InputError) {
	start := 0
	if t.nCarry > 0 {
		// Finish the character left incomplete by the previous read.
		var buf [2 * utf8.UTFMax]byte
		k := copy(buf[:], t.carry[:t.nCarry])
		k += copy(buf[k:utf8.UTFMax], b)
		if !utf8.FullRune(buf[:k]) {
			t.nCarry = copy(t.carry[:], buf[:k])
			return len(b), nil
		}
		r, size := utf8.DecodeRune(buf[:k])
		if r == utf8.RuneError && size == 1 {
			return 0, t.invalid(buf[0])
		}
		start = size - t.nCarry
		t.nCarry = 0
	}
	rest := b[start:]
	tail := incompleteTail(rest)
	body := rest[:len(rest)-tail]
	if bytes.IndexByte(body, 0) >= 0 || !utf8.Valid(body) {
		return t.locate(b, start)
	}
	t.line += bytes.Count(body, []byte{'\n'})
	t.nCarry = copy(t.carry[:], rest[len(rest)-tail:])
	return len(b), nil
}

// locate finds the first fault in b[start:], known to hold one, and returns
// the count of sound bytes before it and the fault itself.
func (t *textReader) locate(b []byte, start int) (int, *InputError) {
	for i := start; i < len(b); {
		c := b[i]
		if c < utf8.RuneSelf {
			if c == 0 {
				return i, &InputError{File: t.name, Line: t.line, Msg: "not a text file: it holds a NUL byte (is it a CSV table?)"}
			}
			if c == '\n' {
				t.line++
			}
			i++
			continue
		}
		r, size := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && size == 1 {
			if !utf8.FullRune(b[i:]) {
				// An incomplete character at the end of the read; the
				// fault check said there is a fault, so it is later on.
				break
			}
			return i, t.invalid(c)
		}
		i += size
	}
	// Unreachable when check's test was right; report the read as faulty
	// rather than let bad bytes through.
	return start, t.invalid(b[start])
}

func (t *textReader) invalid(c byte) *InputError {
	return &InputError{File: t.name, Line: t.line, Msg: fmt.Sprintf("not UTF-8 text: invalid byte 0x%02X (save the file as UTF-8)", c)}
}

// incompleteTail is the length of a character at the end of b that has
// started but not finished, or 0.
func incompleteTail(b []byte) int {
	for k := 1; k < utf8.UTFMax && k <= len(b); k++ {
		c := b[len(b)-k]
		if c < utf8.RuneSelf {
			return 0
		}
		if utf8.RuneStart(c) {
			if utf8.FullRune(b[len(b)-k:]) {
				return 0
			}
			return k
		}
	}
	return 0
}
