package outfile

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"os"
	"sort"
	"sync"
)

// tempPrefix marks ferry's temporary files, so that a user who finds one
// after a power cut knows where it came from. The full name is
// tempPrefix + host + "-" + pid + "-" + random: the host (a short hash of its
// name) and the process id let a later run tell a file whose writer is gone
// from one still being written (removeStale).
const tempPrefix = ".ferry-partial-"

// Tracker knows the temporary files of one process that are not yet renamed
// into place or removed. A signal handler calls RemoveAll before the process
// ends, so that an interrupt during a step that cannot stop at once (one
// large factorisation) still leaves nothing behind. A nil *Tracker tracks
// nothing.
type Tracker struct {
	mu     sync.Mutex
	files  map[string]bool
	closed bool
}

// NewTracker returns an empty Tracker.
func NewTracker() *Tracker { return &Tracker{files: map[string]bool{}} }

type trackerKey struct{}

// WithTracker returns a context that carries t to every Write made with it.
func WithTracker(ctx context.Context, t *Tracker) context.Context {
	return context.WithValue(ctx, trackerKey{}, t)
}

func trackerFrom(ctx context.Context) *Tracker {
	t, _ := ctx.Value(trackerKey{}).(*Tracker)
	return t
}

// errClosed is returned for a file asked for once the process is ending.
var errClosed = errors.New("the program is ending after an interrupt")

// RemoveAll removes every temporary file t knows and refuses to create or
// rename any after it. It returns the names removed, sorted. It holds t's
// lock until it returns, and a caller that exits the process right after
// keeps every Write that has not yet renamed its file from doing so.
func (t *Tracker) RemoveAll() []string {
	if t == nil {
		return nil
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	t.closed = true
	var removed []string
	for name := range t.files {
		if err := os.Remove(name); err == nil {
			removed = append(removed, name)
		}
		delete(t.files, name)
	}
	sort.Strings(removed)
	return removed
}

// create makes a temporary file in dir, known to t.
func (t *Tracker) create(dir string) (*os.File, error) {
	pattern := fmt.Sprintf("%s%s-%d-*", tempPrefix, hostTag(), os.Getpid())
	if t == nil {
		return os.CreateTemp(dir, pattern)
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	if t.closed {
		return nil, errClosed
	}
	f, err := os.CreateTemp(dir, pattern)
	if err == nil {
		t.files[f.Name()] = true
	}
	return f, err
}

// rename moves tmp onto path unless ctx is cancelled, as one step under t's
// lock: an interrupt either comes before it (and the file is not renamed)
// or after it.
func (t *Tracker) rename(ctx context.Context, tmp, path string) error {
	if t != nil {
		t.mu.Lock()
		defer t.mu.Unlock()
		if t.closed {
			return errClosed
		}
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		return err
	}
	if t != nil {
		delete(t.files, tmp)
	}
	return nil
}

// remove removes tmp and forgets it.
func (t *Tracker) remove(tmp string) {
	if t != nil {
		t.mu.Lock()
		defer t.mu.Unlock()
		delete(t.files, tmp)
	}
	os.Remove(tmp)
}

// hostTag is a short hash of the machine's name: a folder shared between
// machines holds temporary files whose process ids mean nothing here.
func hostTag() string {
	name, err := os.Hostname()
	if err != nil {
		name = "unknown"
	}
	h := fnv.New32a()
	h.Write([]byte(name))
	return fmt.Sprintf("%08x", h.Sum32())
}
