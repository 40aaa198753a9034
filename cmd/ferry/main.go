// Command ferry registers in vivo two-photon volumes to electron-microscopy
// volumes of the same tissue from landmark pairs, checks the registration by
// leave-one-out, and maps and matches imaged cells with their uncertainty.
//
// The commands, flags, columns and exit codes are those of the project's
// contract, documented in docs/usage.md.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

// Exit statuses of the contract.
const (
	exitOK      = 0
	exitError   = 1
	exitQuality = 3
)

// errQuality is returned by a command that finished its work but whose
// quality check failed; main turns it into exit status 3.
var errQuality = errors.New("quality check failed")

func main() {
	// An interrupt cancels the context: outputs then are not renamed into
	// place and their temporary files are removed before the program ends.
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	os.Exit(run(ctx, os.Args[1:], os.Stdout, os.Stderr))
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
		fmt.Fprintf(stderr, "ferry: interrupted: %v\n", err)
		return exitError
	default:
		fmt.Fprintf(stderr, "ferry: %v\n", err)
		return exitError
	}
}
