package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"liftyard/dashboard"
	"liftyard/rig"
	"os"
	"strconv"
	"strings"
	"sync"
)

// errHelp is returned when the user asked for a verb's help: exit 0.
var errHelp = errors.New("help shown")

// newFlags makes a flag set for one verb whose --help prints the summary,
// the usage line and the flags to stdout.
func newFlags(name, usage, summary string, stdout io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	// The flag package calls Usage on every parse error as well as on
	// -h/--help; the help is printed by parseFlags, once, for help only.
	fs.Usage = func() {}
	helpOf.Store(fs, func() {
		fmt.Fprintf(stdout, "liftyard %s: %s\n\nUsage: liftyard %s %s\n\nFlags:\n", name, summary, name, usage)
		printFlags(stdout, fs)
	})
	return fs
}

// helpOf maps each verb's flag set to the function printing its help.
var helpOf sync.Map // *flag.FlagSet → func()

// printFlags lists fs's flags as they are written on the command line
// (--name, never -name), with their argument and default.
func printFlags(w io.Writer, fs *flag.FlagSet) {
	fs.VisitAll(func(f *flag.Flag) {
		arg, usage := flag.UnquoteUsage(f)
		line := "  --" + f.Name
		if arg != "" {
			line += " " + strings.ToUpper(arg)
		}
		fmt.Fprintf(w, "%s\n    \t%s", line, strings.ReplaceAll(usage, "\n", "\n    \t"))
		if d := f.DefValue; d != "" && d != "false" && d != "0" && d != "[]" {
			if _, isString := f.Value.(interface{ String() string }); isString && arg == "string" {
				d = strconv.Quote(d)
			}
			fmt.Fprintf(w, " (default %s)", d)
		}
		fmt.Fprintln(w)
	})
}

// parseFlags parses args and turns flag errors into usage errors. Flags may
// come before or after positional arguments.
func parseFlags(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				if h, ok := helpOf.Load(fs); ok {
					h.(func())()
				}
				return nil, errHelp
			}
			msg := strings.Replace(err.Error(), "flag provided but not defined: -", "unknown flag --", 1)
			msg = strings.Replace(msg, "flag needs an argument: -", "flag needs an argument: --", 1)
			msg = strings.Replace(msg, " for flag -", " for flag --", 1)
			return nil, usagef("%s (see liftyard %s --help)", msg, fs.Name())
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

// readRig reads and parses the rig file at path: a file that cannot be
// read is bad usage, a bad one gives rig.Errors naming its lines (both exit
// 2). It returns the text too, which a run stores.
func readRig(path string) (*rig.Rig, []byte, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, nil, usagef("read rig file: %v", err)
	}
	r, err := rig.Parse(path, data)
	if err != nil {
		return nil, nil, err
	}
	return r, data, nil
}

// tokenEnv names the environment variable that may hold the dashboard
// token, so it need not show in the process list.
const tokenEnv = "LIFTYARD_TOKEN"

// tokenFlags adds --token and --token-file to fs. The returned func gives
// the token from --token, else the first line of --token-file, else
// $LIFTYARD_TOKEN, and warns on stderr when one is given for a loopback
// address, where it is not used.
func tokenFlags(fs *flag.FlagSet) func(addr string, stderr io.Writer) (string, error) {
	token := fs.String("token", "", "dashboard access token, required when --addr is not loopback (visible in the process list: prefer --token-file or $"+tokenEnv+")")
	file := fs.String("token-file", "", "file whose first line is the dashboard access token")
	return func(addr string, stderr io.Writer) (string, error) {
		t := *token
		if t == "" && *file != "" {
			data, err := os.ReadFile(*file)
			if err != nil {
				return "", usagef("--token-file: %v", err)
			}
			t = strings.TrimSpace(strings.SplitN(string(data), "\n", 2)[0])
			if t == "" {
				return "", usagef("--token-file %s: the first line is empty", *file)
			}
		}
		if t == "" {
			t = os.Getenv(tokenEnv)
		}
		if t != "" && dashboard.LoopbackAddr(addr) {
			fmt.Fprintf(stderr, "liftyard: warning: a token is not used on the loopback address %s (only this computer can connect); it is asked for off loopback\n", addr)
		}
		return t, nil
	}
}
