// Command forewarn forecasts growing metric series from a message bus.
//
// Subcommands live in their own files and register themselves in init;
// main only dispatches.
package main

import (
	"fmt"
	"io"
	"os"
	"sort"
)

// Exit codes (CONTRACT.md §1).
const (
	exitOK      = 0
	exitFailure = 1 // runtime failure
	exitUsage   = 2 // bad usage or bad input file
)

// command is one subcommand. run receives the arguments after the
// subcommand name and returns the process exit code.
type command struct {
	summary string
	run     func(args []string, stdout, stderr io.Writer) int
}

var commands = map[string]command{}

// register adds a subcommand; it is called from init in each command's file.
func register(name, summary string, run func(args []string, stdout, stderr io.Writer) int) {
	if _, dup := commands[name]; dup {
		panic("forewarn: command registered twice: " + name)
	}
	commands[name] = command{summary: summary, run: run}
}

func usage(w io.Writer) {
	fmt.Fprintln(w, "usage: forewarn COMMAND [flags] [args]")
	fmt.Fprintln(w, "\ncommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-9s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nRun 'forewarn COMMAND -h' for the flags of one command.")
}

func main() {
	os.Exit(dispatch(os.Args[1:], os.Stdout, os.Stderr))
}

func dispatch(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		usage(stderr)
		return exitUsage
	}
	switch args[0] {
	case "-h", "-help", "--help", "help":
		usage(stdout)
		return exitOK
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "forewarn: unknown command %q\n\n", args[0])
		usage(stderr)
		return exitUsage
	}
	return c.run(args[1:], stdout, stderr)
}
