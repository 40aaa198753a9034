package main

import (
	"errors"
	"fmt"
	"strings"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
)

// usageError is a mistake on the command line: its message, then the
// command's usage line, so that the user sees at once what to type.
func usageError(cmd *cobra.Command, format string, a ...any) error {
	if !cmd.HasParent() {
		// ferry itself: the message is already prefixed "ferry: ".
		return &commandLineError{msg: fmt.Sprintf(format, a...), usage: rootUsage}
	}
	return &commandLineError{msg: cmd.Name() + ": " + fmt.Sprintf(format, a...), usage: cmd.UseLine()}
}

// commandLineError is what usageError makes: the message, which is printed
// on one line as every message is, and the usage line printed below it.
type commandLineError struct{ msg, usage string }

func (e *commandLineError) Error() string { return e.msg + "\nusage: " + e.usage }

// rootUsage is the usage line of ferry itself.
const rootUsage = "ferry COMMAND [flags] (ferry --help lists the commands)"

// rootArgs refuses a word that names no command, with the commands it
// may have meant: ferry itself takes no arguments.
func rootArgs(cmd *cobra.Command, args []string) error {
	if len(args) == 0 {
		return nil
	}
	msg := fmt.Sprintf("unknown command %q", args[0])
	if near := cmd.SuggestionsFor(args[0]); len(near) > 0 {
		msg += fmt.Sprintf(": did you mean %s?", strings.ReplaceAll(listed(near), " and ", " or "))
	}
	return usageError(cmd, "%s", msg)
}

// exactArgs takes exactly the arguments named, and names the missing ones
// (or says how many are too many) with the usage line.
func exactArgs(names ...string) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		switch {
		case len(args) < len(names):
			return usageError(cmd, "missing %s", listed(names[len(args):]))
		case len(args) > len(names):
			return usageError(cmd, "%d arguments given (%s), want %d (%s)", len(args), strings.Join(args, " "), len(names), strings.Join(names, " "))
		}
		return nil
	}
}

// maxArgs takes at most the arguments named.
func maxArgs(names ...string) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if len(args) > len(names) {
			return usageError(cmd, "%d arguments given (%s), want at most %d (%s)", len(args), strings.Join(args, " "), len(names), strings.Join(names, " "))
		}
		return nil
	}
}

// noArgs takes no argument.
func noArgs(cmd *cobra.Command, args []string) error {
	if len(args) > 0 {
		return usageError(cmd, "takes no arguments, got %s", strings.Join(args, " "))
	}
	return nil
}

// flagError adds the usage line to a flag that cobra could not parse. A
// value of the wrong kind is said in the user's terms, not strconv's.
func flagError(cmd *cobra.Command, err error) error {
	var bad *pflag.InvalidValueError
	if errors.As(err, &bad) {
		want := map[string]string{
			"float64": "a number",
			"int":     "a whole number",
			"uint64":  "a whole number, 0 or more",
			"bool":    "true or false",
		}[bad.GetFlag().Value.Type()]
		if want == "" {
			// A value type of ferry's own (decimalFlag) says why itself.
			return usageError(cmd, "--%s %q: %v", bad.GetFlag().Name, bad.GetValue(), errors.Unwrap(err))
		}
		return usageError(cmd, "--%s %q: want %s", bad.GetFlag().Name, bad.GetValue(), want)
	}
	return usageError(cmd, "%v", err)
}

// listed joins names as a person writes a list: "A", "A and B", "A, B and C".
func listed(names []string) string {
	if len(names) < 2 {
		return strings.Join(names, "")
	}
	return strings.Join(names[:len(names)-1], ", ") + " and " + names[len(names)-1]
}
