// Command bbmx runs Monte Carlo sweeps of branching Brownian motion in R^d, merges and
// audits their stores, solves for the exact law of the maximal radius, and fits and
// reports what comes out. Every number it prints from simulation is a statistical
// estimate; the law solver's numbers are deterministic and come with an error estimate.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"sort"
	"strings"
)

// command is one subcommand. run returns an error; a usageError exits with status 2.
type command struct {
	name    string
	summary string
	run     func(args []string, stdout, stderr io.Writer) error
}

var commands = map[string]command{}

// register adds a subcommand; each subcommand's file calls it from init.
func register(c command) { commands[c.name] = c }

// usageError marks bad input: the message is printed on one line and the exit status is 2.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return usageError{fmt.Sprintf(format, a...)} }

// helpText is a command's answer to -h or --help: its usage, which runMain prints on
// standard output with status 0.
type helpText string

func (h helpText) Error() string { return "help requested" }

func main() { os.Exit(runMain(os.Args[1:], os.Stdout, os.Stderr)) }

// runMain dispatches to a subcommand and maps its error to an exit status:
// 0 success, 2 bad input, 1 any other failure.
func runMain(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		topUsage(stdout)
		return 0
	}
	c, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "bbmx: unknown command %q (run 'bbmx help' for the list)\n", args[0])
		return 2
	}
	err := c.run(args[1:], stdout, stderr)
	var help helpText
	switch {
	case err == nil:
		return 0
	case errors.As(err, &help):
		fmt.Fprint(stdout, string(help)) // asked for, so on standard output: | less works
		return 0
	}
	var ue usageError
	if errors.As(err, &ue) {
		fmt.Fprintf(stderr, "bbmx %s: %s\n", c.name, oneLine(ue.msg))
		return 2
	}
	fmt.Fprintf(stderr, "bbmx %s: %s\n", c.name, oneLine(err.Error()))
	return 1
}

func oneLine(s string) string { return strings.ReplaceAll(strings.TrimSpace(s), "\n", "; ") }

func topUsage(w io.Writer) {
	fmt.Fprintln(w, "bbmx: Monte Carlo sweeps of branching Brownian motion in R^d, and their fits.")
	fmt.Fprintln(w, "\nUsage: bbmx COMMAND [flags]   (bbmx COMMAND --help explains each)\n\nCommands:")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-8s %s\n", n, commands[n].summary)
	}
	fmt.Fprintln(w, "\nResults from simulation are statistical estimates; every estimate is shown with its uncertainty.")
}

// newFlagSet makes a flag set whose parse errors become usage errors (exit status 2)
// and whose --help text starts with the given description.
func newFlagSet(name, synopsis, description string) *flag.FlagSet {
	fs := flag.NewFlagSet("bbmx "+name, flag.ContinueOnError)
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "Usage: bbmx %s %s\n\n%s\n\nFlags:\n", name, synopsis, description)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses args and turns a parse failure into a usage error, and -h or
// --help into the command's help text (see helpText).
func parseFlags(fs *flag.FlagSet, args []string) error {
	fs.SetOutput(io.Discard)
	err := fs.Parse(args)
	if errors.Is(err, flag.ErrHelp) {
		var b strings.Builder
		fs.SetOutput(&b)
		fs.Usage()
		return helpText(b.String())
	}
	if err != nil {
		return usageError{err.Error()}
	}
	return nil
}
