package main

import (
	"flag"
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
