package main

import (
	"context"
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"ferry/outfile"
)

// stdoutName is the -o value that means standard output.
const stdoutName = "-"

// writeOutput writes a command's output file through fill, whole or not at
// all: to standard output for "-o -", else through outfile, which
// writes into a device or pipe as a stream and never replaces one.
func writeOutput(cmd *cobra.Command, out string, fill func(w io.Writer) error) error {
	if out == stdoutName {
		return outfile.WriteTo(cmd.Context(), cmd.OutOrStdout(), "standard output", fill)
	}
	return outfile.Write(cmd.Context(), out, fill)
}

// writeOutputBytes is writeOutput for data already in memory.
func writeOutputBytes(cmd *cobra.Command, out string, data []byte) error {
	return writeOutput(cmd, out, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// summaryWriter is where a command prints its summary for the eye: standard
// error when the output itself goes to standard output or to another stream
// (a pipe, a terminal, /dev/stdout), so that the data stay clean.
func summaryWriter(cmd *cobra.Command, out string) io.Writer {
	if out == stdoutName || outfile.IsStream(out) {
		return cmd.ErrOrStderr()
	}
	return cmd.OutOrStdout()
}

// outputName is how messages name the output.
func outputName(out string) string {
	if out == stdoutName {
		return "standard output"
	}
	return out
}

// refuseStdout refuses "-o -" for an output that is neither a table nor
// JSON: an image or a page is not for a terminal.
func refuseStdout(out, what string) error {
	if out == stdoutName {
		return fmt.Errorf("-o -: standard output takes tables and JSON, not %s; give a file name", what)
	}
	return nil
}

// writeTable writes a table: to standard output alone when out is "-"
// (fill), otherwise with its sidecar through toFile (register.WriteTable and
// the writers built on it).
func writeTable(cmd *cobra.Command, out string, toFile func(ctx context.Context, path string) error, fill func(w io.Writer) error) error {
	if out == stdoutName {
		return outfile.WriteTo(cmd.Context(), cmd.OutOrStdout(), "standard output", fill)
	}
	return toFile(cmd.Context(), out)
}
