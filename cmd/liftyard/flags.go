package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
)

// errHelp is returned when the user asked for a verb's help: exit 0.
var errHelp = errors.New("help shown")

// newFlags makes a flag set for one verb whose --help prints the summary,
// the usage line and the flags to stdout.
func newFlags(name, usage, summary string, stdout io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {
		fmt.Fprintf(stdout, "liftyard %s: %s\n\nUsage: liftyard %s %s\n\nFlags:\n", name, summary, name, usage)
		fs.SetOutput(stdout)
		fs.PrintDefaults()
		fs.SetOutput(io.Discard)
	}
	return fs
}

// parseFlags parses args and turns flag errors into usage errors. Flags may
// come before or after positional arguments.
func parseFlags(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				fs.Usage()
				return nil, errHelp
			}
			return nil, usagef("%v (see liftyard %s --help)", err, fs.Name())
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}
