// Command ferry registers in vivo two-photon volumes to electron-microscopy
// volumes of the same tissue from landmark pairs, checks the registration by
// leave-one-out, and maps and matches imaged cells with their uncertainty.
//
// The commands, flags and exit codes are documented in docs/usage.md, the
// files and their columns in docs/formats.md.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"strconv"
	"strings"
	"syscall"
	"time"
	"unicode"

	"ferry/internal/remedy"
	"ferry/outfile"
)

// Exit statuses (docs/usage.md).
const (
	exitOK      = 0
	exitError   = 1
	exitQuality = 3
)

// errQuality is returned by a command that finished its work but whose
// quality check failed; main turns it into exit status 3.
var errQuality = errors.New("quality check failed")

// exitGrace is how long after a signal the program waits for the command
// to notice its cancelled context and end by itself. A step that cannot be
// cut short (one factorisation of a large spline takes seconds) is then
// abandoned: the handler removes the temporary files and ends the process.
const exitGrace = time.Second

func main() {
	// An interrupt (Ctrl-C), a termination request or a closed terminal
	// cancels the context: outputs then are not renamed into place and
	// their temporary files are removed before the program ends.
	tracker := outfile.NewTracker()
	ctx, cancel := context.WithCancel(outfile.WithTracker(context.Background(), tracker))
	signals := make(chan os.Signal, 2)
	signal.Notify(signals, os.Interrupt, syscall.SIGTERM, syscall.SIGHUP)
	go endOnSignal(signals, cancel, tracker, os.Stderr)
	os.Exit(run(ctx, os.Args[1:], os.Stdout, os.Stderr))
}

// endOnSignal waits for a signal, cancels the run, and when the run has not
// ended within exitGrace (or at a second signal) removes every temporary
// file and ends the process with exit status 1, the status of an
// interrupted run that ends by itself.
func endOnSignal(signals <-chan os.Signal, cancel func(), tracker *outfile.Tracker, stderr io.Writer) {
	sig := <-signals
	cancel()
	select {
	case <-time.After(exitGrace):
	case <-signals:
	}
	tracker.RemoveAll()
	fmt.Fprintf(stderr, "ferry: interrupted (%v) during a step that cannot stop at once; no output written by it\n", sig)
	os.Exit(exitError)
}

// run executes one command line and returns the exit status.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	root := newRootCommand(stdout, stderr)
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	switch {
	case err == nil:
		return exitOK
	case errors.Is(err, errQuality):
		return exitQuality
	case ctx.Err() != nil:
		// The error itself may only say "context canceled".
		fmt.Fprintf(stderr, "ferry: interrupted: %s\n", oneLineMessage(err))
		return exitError
	default:
		var usage *commandLineError
		if errors.As(err, &usage) {
			fmt.Fprintf(stderr, "ferry: %s\nusage: %s\n", oneLineMessage(errors.New(usage.msg)), usage.usage)
			return exitError
		}
		fmt.Fprintf(stderr, "ferry: %s\n", oneLineMessage(err))
		return exitError
	}
}

// oneLineMessage is err's message on one line, with the inputs it asks to
// change named by their flags (flagName): a control character (a line
// break in a file name, say) is written with Go's escape, \n.
func oneLineMessage(err error) string {
	msg := remedy.Named(err, flagName)
	if strings.IndexFunc(msg, unicode.IsControl) < 0 {
		return msg
	}
	var b strings.Builder
	for _, r := range msg {
		if unicode.IsControl(r) {
			q := strconv.QuoteRune(r)
			b.WriteString(q[1 : len(q)-1])
			continue
		}
		b.WriteRune(r)
	}
	return b.String()
}
