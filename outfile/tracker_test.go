package outfile

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestTrackerRemoveAll: a signal handler's RemoveAll removes a temporary
// file still being written, and the Write then neither renames it into place
// nor makes another.
func TestTrackerRemoveAll(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "out.csv")
	tr := NewTracker()
	ctx := WithTracker(context.Background(), tr)
	started, release := make(chan struct{}), make(chan struct{})
	done := make(chan error, 1)
	go func() {
		done <- Write(ctx, out, func(w io.Writer) error {
			io.WriteString(w, "part")
			close(started)
			<-release
			return nil
		})
	}()
	<-started
	removed := tr.RemoveAll()
	if len(removed) != 1 || !strings.HasPrefix(filepath.Base(removed[0]), tempPrefix) {
		t.Errorf("RemoveAll removed %v, want the one temporary file", removed)
	}
	close(release)
	if err := <-done; err == nil {
		t.Error("Write succeeded after RemoveAll")
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 0 {
		t.Errorf("folder holds %v, want nothing", entries)
	}
	if err := WriteBytes(ctx, out, []byte("x")); err == nil {
		t.Error("a Write after RemoveAll succeeded")
	}
}

// TestRemoveStale is the regression test of a finding: a process killed
// while writing left a .ferry-partial-* file that no later run removed. A
// later Write into the folder removes such a file when its process is gone
// and it is older than StaleAge, and nothing else.
func TestRemoveStale(t *testing.T) {
	dir := t.TempDir()
	old := time.Now().Add(-2 * StaleAge)
	gone := deadPID(t)
	files := []struct {
		name  string
		old   bool
		stays bool
	}{
		{fmt.Sprintf("%s%s-%d-123", tempPrefix, hostTag(), gone), true, false},
		{fmt.Sprintf("%s%s-%d-124", tempPrefix, hostTag(), gone), false, true},        // recent
		{fmt.Sprintf("%s%s-%d-125", tempPrefix, hostTag(), os.Getppid()), true, true}, // alive
		{fmt.Sprintf("%s%s-%d-126", tempPrefix, "0badf00d", gone), true, true},        // another machine
		{fmt.Sprintf("%s%d", tempPrefix, 1234567), true, true},                        // an older form
		{"landmarks.csv", true, true},
	}
	for _, f := range files {
		p := filepath.Join(dir, f.name)
		if err := os.WriteFile(p, []byte("x"), 0o600); err != nil {
			t.Fatal(err)
		}
		if f.old {
			if err := os.Chtimes(p, old, old); err != nil {
				t.Fatal(err)
			}
		}
	}
	if err := WriteBytes(context.Background(), filepath.Join(dir, "out.csv"), []byte("x")); err != nil {
		t.Fatal(err)
	}
	for _, f := range files {
		_, err := os.Stat(filepath.Join(dir, f.name))
		if stays := err == nil; stays != f.stays {
			t.Errorf("%s: stays %v, want %v", f.name, stays, f.stays)
		}
	}
}

// deadPID returns a process id that no process has: one of a child that has
// been waited for, or a very large one.
func deadPID(t *testing.T) int {
	t.Helper()
	for pid := 4194000; pid > 4000000; pid-- {
		if !processAlive(pid) {
			return pid
		}
	}
	t.Skip("no free process id found")
	return 0
}
