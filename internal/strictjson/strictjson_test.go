package strictjson

import (
	"errors"
	"strings"
	"testing"
)

func TestUnmarshal(t *testing.T) {
	type point struct {
		X float64 `json:"x"`
	}
	for _, tc := range []struct {
		name, data, want string
	}{
		{"known fields", `{"x": 1.5}`, ""},
		{"unknown field", `{"x": 1, "y": 2}`, `unknown field "y"`},
		{"data after the object", `{"x": 1} {"x": 2}`, "data after the end of the JSON object"},
		{"wrong type", `{"x": "one"}`, "cannot unmarshal string"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var p point
			err := Unmarshal([]byte(tc.data), &p)
			switch {
			case tc.want == "" && (err != nil || p.X != 1.5):
				t.Errorf("got %+v, %v; want x 1.5", p, err)
			case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
				t.Errorf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
}

func TestPosition(t *testing.T) {
	for _, tc := range []struct {
		name, data string
		line, col  int
		ok         bool
	}{
		{"stray character on line 3", "{\n  \"x\": 1,\n  \"y\": 2 z\n}", 3, 10, true},
		{"type error on line 2", "{\n  \"x\": \"one\"\n}", 2, 12, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var v struct {
				X float64 `json:"x"`
				Y float64 `json:"y"`
			}
			err := Unmarshal([]byte(tc.data), &v)
			line, col, ok := Position([]byte(tc.data), err)
			if line != tc.line || col != tc.col || ok != tc.ok {
				t.Errorf("Position: %d:%d %v, want %d:%d %v (error %v)", line, col, ok, tc.line, tc.col, tc.ok, err)
			}
		})
	}
	if _, _, ok := Position(nil, errors.New("not a JSON error")); ok {
		t.Error("Position placed an error that is not JSON's")
	}
}
