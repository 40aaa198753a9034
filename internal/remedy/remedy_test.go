package remedy

import (
	"errors"
	"fmt"
	"io"
	"testing"
)

func flag(in Input) string {
	return map[Input]string{OutputVoxel: "--voxel", OutputBox: "--bounds", TargetVoxel: "--target-voxel"}[in]
}

func TestNamed(t *testing.T) {
	voxel := Ref{Input: OutputVoxel, Words: "output voxel size"}
	box := Ref{Input: OutputBox, Words: "output box"}
	page := Ref{Input: TargetPage, Words: "the target page"}
	target := Ref{Input: TargetVoxel, Words: "a target voxel size", Form: "X,Y,Z"}
	inner := Errorf("a.tif: %d voxels; choose a coarser %s or smaller %s", 7, voxel, box)
	note := Sprintf("; %s counts pages", page)
	tests := []struct {
		name        string
		err         error
		words, flag string
	}{
		{"refs", inner, "a.tif: 7 voxels; choose a coarser output voxel size or smaller output box",
			"a.tif: 7 voxels; choose a coarser --voxel or smaller --bounds"},
		{"wrapped by context", fmt.Errorf("warp: %w", inner), "warp: a.tif: 7 voxels; choose a coarser output voxel size or smaller output box",
			"warp: a.tif: 7 voxels; choose a coarser --voxel or smaller --bounds"},
		{"form and a name the caller lacks", Errorf("give %s, or leave out %s", target, page), "give a target voxel size, or leave out the target page",
			"give --target-voxel X,Y,Z, or leave out the target page"},
		{"a message within", Errorf("page 3 is outside%s", note), "page 3 is outside; the target page counts pages", "page 3 is outside; the target page counts pages"},
		{"an error within", Errorf("output of %w; give %s", Errorf("%s too large", box), target), "output of output box too large; give a target voxel size",
			"output of --bounds too large; give --target-voxel X,Y,Z"},
		{"no refs", errors.New("plain"), "plain", "plain"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if got := tt.err.Error(); got != tt.words {
				t.Errorf("Error() = %q, want %q", got, tt.words)
			}
			if got := Named(tt.err, flag); got != tt.flag {
				t.Errorf("Named = %q, want %q", got, tt.flag)
			}
		})
	}
}

func TestErrorfWraps(t *testing.T) {
	err := Errorf("reading: %w", io.ErrUnexpectedEOF)
	if !errors.Is(err, io.ErrUnexpectedEOF) {
		t.Error("errors.Is does not see the wrapped error")
	}
	var e *Error
	if !errors.As(fmt.Errorf("ctx: %w", err), &e) {
		t.Error("errors.As does not find the *Error")
	}
	if (Message{}).String() != "" || (Message{}).Named(flag) != "" {
		t.Error("the zero Message is not empty")
	}
}
