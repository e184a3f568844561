package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
)

// parseArgs parses flags that may come before or after the positional
// arguments ("digitize IMAGE -o DIR" and "digitize -o DIR IMAGE" both
// work). It returns the positional arguments; "--" ends flag parsing.
func parseArgs(fs *flag.FlagSet, args []string, stderr io.Writer) ([]string, error) {
	fs.SetOutput(stderr)
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		if rest[0] == "--" {
			return append(pos, rest[1:]...), nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

// parseCommand parses a subcommand's arguments with parseArgs and turns
// the outcome into the exit protocol: ok is false when the caller must
// return code at once (0 after -h, 2 after a bad flag, already reported
// by the flag package).
func parseCommand(fs *flag.FlagSet, args []string, stderr io.Writer) (pos []string, code int, ok bool) {
	pos, err := parseArgs(fs, args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return nil, 0, false
		}
		return nil, 2, false
	}
	return pos, 0, true
}

// usageFunc returns a FlagSet's Usage function: the lines, then the flags'
// defaults, on stderr.
func usageFunc(fs *flag.FlagSet, stderr io.Writer, lines ...string) func() {
	return func() {
		for _, l := range lines {
			fmt.Fprintln(stderr, l)
		}
		fs.PrintDefaults()
	}
}

// usageError reports a usage mistake of the named subcommand, points to
// its help and returns the usage exit code, 2.
func usageError(stderr io.Writer, name, msg string) int {
	fmt.Fprintf(stderr, "tracelift-cli %s: %s\n", name, msg)
	fmt.Fprintf(stderr, "Run 'tracelift-cli %s -h' for the options.\n", name)
	return 2
}
