// Command quietband watches GNSS-band IQ captures for interference: it
// analyses each capture with a bank of detectors, writes what it finds to a
// tamper-evident event log and exposes live state as Prometheus metrics.
//
// Each subcommand lives in a file of its own; this file only dispatches.
package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"runtime"
	"sort"
	"strings"

	"quietband/detect"
	"quietband/metrics"
)

// command is one subcommand.
type command struct {
	summary string
	run     func(args []string, out, errOut io.Writer) error
}

var commands = map[string]command{}

func register(name, summary string, run func(args []string, out, errOut io.Writer) error) {
	commands[name] = command{summary: summary, run: run}
}

// errUsage marks a command-line mistake; the message has been printed.
var errUsage = errors.New("usage")

// exitCode lets a command ask for a specific non-zero exit status.
type exitCode int

func (e exitCode) Error() string { return fmt.Sprintf("exit status %d", int(e)) }

func usage(w io.Writer) {
	fmt.Fprintf(w, "quietband: interference monitor for GNSS-band IQ captures\n\nUsage: quietband COMMAND [flags] [args]\n\nCommands:\n")
	names := make([]string, 0, len(commands))
	for n := range commands {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-8s %s\n", n, commands[n].summary)
	}
	fmt.Fprintf(w, "\nRun 'quietband COMMAND --help' (or 'quietband help COMMAND') for a command's flags;\n'quietband --version' for the build.\n")
}

func main() {
	os.Exit(runMain(os.Args[1:], os.Stdout, os.Stderr))
}

func runMain(args []string, out, errOut io.Writer) int {
	if len(args) > 0 && (args[0] == "--version" || args[0] == "-version" || args[0] == "version") {
		v, r := metrics.Build()
		fmt.Fprintf(out, "quietband %s (revision %s, detectors %s, %s)\n", v, r, detect.Version, runtime.Version())
		return 0
	}
	if len(args) == 2 && args[0] == "help" {
		// "quietband help run" is "quietband run --help".
		args = []string{args[1], "--help"}
	}
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(out)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	cmd, ok := commands[args[0]]
	if !ok {
		fmt.Fprintf(errOut, "quietband: unknown command %q\n\n", args[0])
		usage(errOut)
		return 2
	}
	err := cmd.run(args[1:], out, errOut)
	var code exitCode
	switch {
	case err == nil || errors.Is(err, flag.ErrHelp):
		return 0
	case errors.Is(err, errUsage):
		return 2
	case errors.As(err, &code):
		return int(code)
	}
	fmt.Fprintf(errOut, "quietband %s: %v\n", args[0], err)
	return 1
}

// newFlags makes a subcommand's flag set whose --help prints the summary,
// the usage line and every flag with its default.
func newFlags(name, argsUsage, description string, errOut io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(errOut)
	fs.Usage = func() {
		fmt.Fprintf(fs.Output(), "Usage: quietband %s [flags] %s\n\n%s\n", name, argsUsage, strings.TrimSpace(description))
		hasFlags := false
		fs.VisitAll(func(*flag.Flag) { hasFlags = true })
		if hasFlags {
			fmt.Fprintf(fs.Output(), "\nFlags:\n")
			fs.PrintDefaults()
		}
	}
	return fs
}

// parseFlags parses args, turning a parse failure into errUsage.
func parseFlags(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return errUsage
	}
	return nil
}
