package progress

import (
	"io"
	"os"
	"sync"
	"time"

	"github.com/schollz/progressbar/v3"
)

// Reporter receives the progress of a long computation. Step starts a new
// stage of total units (0 when the total is not known); Add reports n more
// units done in the current stage; Finish ends the stage. Implementations are
// safe for concurrent Add calls.
type Reporter interface {
	Step(name string, total int)
	Add(n int)
	Finish()
}

// None is a Reporter that shows nothing.
var None Reporter = none{}

type none struct{}

func (none) Step(string, int) {}
func (none) Add(int)          {}
func (none) Finish()          {}

// Of returns r, or None when r is nil, so that library code can call a
// caller's optional Reporter without checking.
func Of(r Reporter) Reporter {
	if r == nil {
		return None
	}
	return r
}

// delay is how long a stage runs before its bar appears: steps shorter than
// this are not worth a bar on the terminal.
const delay = time.Second

// Terminal returns a Reporter that draws a progress bar on w when w is a
// terminal, and None otherwise (a file or a pipe gets no bar codes).
func Terminal(w *os.File) Reporter {
	if w == nil || !IsTerminal(w) {
		return None
	}
	return &bar{w: w}
}

// IsTerminal reports whether f is a terminal (a character device).
func IsTerminal(f *os.File) bool {
	info, err := f.Stat()
	return err == nil && info.Mode()&os.ModeCharDevice != 0
}

type bar struct {
	w io.Writer

	mu      sync.Mutex
	name    string
	total   int
	done    int
	started time.Time
	pb      *progressbar.ProgressBar
}

func (b *bar) Step(name string, total int) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.finishLocked()
	b.name, b.total, b.done, b.started = name, total, 0, time.Now()
}

func (b *bar) Add(n int) {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.done += n
	if b.pb == nil {
		if time.Since(b.started) < delay {
			return
		}
		max := b.total
		if max <= 0 {
			max = -1 // a spinner: the total is unknown
		}
		b.pb = progressbar.NewOptions(max,
			progressbar.OptionSetWriter(b.w),
			progressbar.OptionSetDescription(b.name),
			progressbar.OptionShowCount(),
			progressbar.OptionSetElapsedTime(true),
			progressbar.OptionSetPredictTime(max > 0),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
		_ = b.pb.Set(b.done)
		return
	}
	_ = b.pb.Add(n)
}

func (b *bar) Finish() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.finishLocked()
}

func (b *bar) finishLocked() {
	if b.pb != nil {
		_ = b.pb.Finish()
		_ = b.pb.Clear()
		b.pb = nil
	}
}

// Recorder is a Reporter that keeps what it hears: the names of the
// stages and the units done in all of them. Tests use it to see that a
// long step reports; its methods are safe for concurrent use.
type Recorder struct {
	mu     sync.Mutex
	steps  []string
	done   int
	finish int
}

// Step records the name of a stage.
func (r *Recorder) Step(name string, _ int) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.steps = append(r.steps, name)
}

// Add records n more units done.
func (r *Recorder) Add(n int) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.done += n
}

// Finish records the end of a stage.
func (r *Recorder) Finish() {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.finish++
}

// Steps are the stage names in the order they started.
func (r *Recorder) Steps() []string {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]string(nil), r.steps...)
}

// Done is the number of units reported in all stages.
func (r *Recorder) Done() int {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.done
}

// Finished is how many times a stage was ended.
func (r *Recorder) Finished() int {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.finish
}
