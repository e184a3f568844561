// Command tracelift-cli is the headless twin of the tracelift desktop app:
// it digitizes ECG printouts, measures records, runs batches and
// benchmarks. It never needs a display.
package main

import (
	"fmt"
	"io"
	"os"
	"sort"
)

// command is one subcommand. run returns the process exit code:
// 0 success, 1 failure of the work, 2 usage error.
type command struct {
	summary string
	run     func(args []string, stdout, stderr io.Writer) int
}

var commands = map[string]command{}

// register adds a subcommand; each lives in its own file and registers
// itself from init.
func register(name, summary string, run func(args []string, stdout, stderr io.Writer) int) {
	if _, dup := commands[name]; dup {
		panic("tracelift-cli: command registered twice: " + name)
	}
	commands[name] = command{summary: summary, run: run}
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: tracelift-cli COMMAND [options]")
	fmt.Fprintln(w, "\ncommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nRun 'tracelift-cli COMMAND -h' for a command's options.")
	fmt.Fprintln(w, "\nNot a diagnostic device: every measurement is to be reviewed by a qualified clinician.")
}

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(stderr)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "tracelift-cli: unknown command %q\n", args[0])
		usage(stderr)
		return 2
	}
	return c.run(args[1:], stdout, stderr)
}
