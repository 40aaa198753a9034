package progress

import (
	"os"
	"path/filepath"
	"testing"
)

func TestTerminalIsSilentOnAFile(t *testing.T) {
	f, err := os.Create(filepath.Join(t.TempDir(), "out"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if r := Terminal(f); r != None {
		t.Fatalf("Terminal on a regular file = %T, want None", r)
	}
}

func TestOfNil(t *testing.T) {
	if Of(nil) != None {
		t.Fatal("Of(nil) is not None")
	}
	r := Of(nil)
	r.Step("x", 3)
	r.Add(1)
	r.Finish()
}

func TestBarCountsBeforeItShows(t *testing.T) {
	b := &bar{w: os.Stderr}
	b.Step("fit", 10)
	b.Add(3)
	b.Add(4)
	if b.done != 7 {
		t.Fatalf("done = %d, want 7", b.done)
	}
	if b.pb != nil {
		t.Fatal("a bar was drawn within the first second")
	}
	b.Finish()
}
