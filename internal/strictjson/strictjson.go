// Package strictjson decodes the JSON files ferry reads with one rule for
// all of them: a field the reader does not know, or anything after the
// object, is refused; and a syntax or type error is placed at its line and
// column.
package strictjson

import (
	"bytes"
	"encoding/json"
	"errors"
)

// Unmarshal decodes data into v, refusing unknown fields and data after the
// end of the JSON value.
func Unmarshal(data []byte, v any) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return err
	}
	if dec.More() {
		return errors.New("data after the end of the JSON object")
	}
	return nil
}

// Position is the line and column (from 1, in bytes) of a JSON syntax or
// type error in data; ok is false for other errors.
func Position(data []byte, err error) (line, col int, ok bool) {
	var offset int64
	var syntax *json.SyntaxError
	var typ *json.UnmarshalTypeError
	switch {
	case errors.As(err, &syntax):
		offset = syntax.Offset
	case errors.As(err, &typ):
		offset = typ.Offset
	default:
		return 0, 0, false
	}
	if offset < 0 || offset > int64(len(data)) {
		return 0, 0, false
	}
	before := data[:offset]
	line = 1 + bytes.Count(before, []byte{'\n'})
	col = int(offset) - (bytes.LastIndexByte(before, '\n') + 1)
	if col < 1 {
		col = 1
	}
	return line, col, true
}
