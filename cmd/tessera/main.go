// Command tessera fits region-level fMRI general linear models: it reads a
// study of pre-extracted region time courses with their event logs and
// motion estimates, and writes tidy tables and a report.
//
// This package holds only the command line: flags, wiring and messages. The
// work is done by packages roi (inputs), fit (designs, estimation,
// inference) and report (outputs).
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"strconv"
	"strings"
	"syscall"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/fit"
)

// exitInterrupted is the exit status after SIGINT or SIGTERM: 128 + 2, as
// shells report a process ended by SIGINT (common practice).
const exitInterrupted = 130

// usageError is bad usage of the command line: exit status 2.
type usageError struct{ msg string }

func (e *usageError) Error() string { return e.msg }

func usagef(format string, a ...any) error { return &usageError{fmt.Sprintf(format, a...)} }

type command struct {
	name    string
	args    string
	summary string
	example string
	run     func(args []string, stdout, stderr io.Writer) error
	// runCtx, when set, is used instead of run: the command stops cleanly
	// when ctx is cancelled (SIGINT, SIGTERM).
	runCtx func(ctx context.Context, args []string, stdout, stderr io.Writer) error
	flags  func() *flag.FlagSet
}

var commands []*command

func init() {
	commands = []*command{demoCommand, simulateCommand, checkCommand, fitCommand, groupCommand, mergeCommand}
}

func lookup(name string) *command {
	for _, c := range commands {
		if c.name == name {
			return c
		}
	}
	return nil
}

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// errInterrupted is the error of a command other than fit stopped by
// SIGINT or SIGTERM before it committed its output.
var errInterrupted = errors.New("interrupted")

// run executes one command line and returns the exit status: 0 done, 1 bad
// input or a model that cannot be fitted, 2 bad usage.
func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		printUsage(stderr)
		return 2
	}
	switch args[0] {
	case "help", "-h", "--help":
		if len(args) > 1 {
			c := lookup(args[1])
			if c == nil {
				fmt.Fprintf(stderr, "tessera: no command %q\n", args[1])
				printUsage(stderr)
				return 2
			}
			printCommandHelp(c, stdout)
			return 0
		}
		printUsage(stdout)
		return 0
	case "version", "--version":
		fmt.Fprintln(stdout, "tessera", version)
		return 0
	}
	c := lookup(args[0])
	if c == nil {
		fmt.Fprintf(stderr, "tessera: no command %q\n", args[0])
		printUsage(stderr)
		return 2
	}
	for _, a := range args[1:] {
		if a == "-h" || a == "--help" {
			printCommandHelp(c, stdout)
			return 0
		}
	}
	var err error
	if c.runCtx != nil {
		ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
		err = c.runCtx(ctx, args[1:], stdout, stderr)
		stop()
	} else {
		err = c.run(args[1:], stdout, stderr)
	}
	if err == nil {
		return 0
	}
	var ie *fit.Interrupted
	if errors.As(err, &ie) {
		fmt.Fprintf(stderr, "tessera %s: %v; nothing was written (no table is partial). Run the command again to fit everything.\n", c.name, err)
		return exitInterrupted
	}
	if errors.Is(err, errInterrupted) {
		fmt.Fprintf(stderr, "tessera %s: interrupted; nothing was written (no table is partial). Run the command again.\n", c.name)
		return exitInterrupted
	}
	var ue *usageError
	if errors.As(err, &ue) {
		fmt.Fprintf(stderr, "tessera %s: %v\nRun 'tessera help %s' for usage.\n", c.name, err, c.name)
		return 2
	}
	fmt.Fprintf(stderr, "tessera %s: %v\n", c.name, err)
	return 1
}

func printUsage(w io.Writer) {
	fmt.Fprintf(w, "tessera: region-level fMRI GLM analysis (research software, not for clinical decisions)\n\n")
	fmt.Fprintf(w, "Usage: tessera COMMAND [arguments] [flags]\n\nCommands:\n")
	for _, c := range commands {
		fmt.Fprintf(w, "  %-9s %s\n", c.name, c.summary)
	}
	fmt.Fprintf(w, "\nRun 'tessera help COMMAND' or 'tessera COMMAND --help' for a command's flags and an example.\n")
}

func printCommandHelp(c *command, w io.Writer) {
	fmt.Fprintf(w, "Usage: tessera %s %s\n\n%s\n\n", c.name, c.args, c.summary)
	fs := c.flags()
	if fs.HasFlags() {
		fmt.Fprintf(w, "Flags:\n%s\n", fs.FlagUsages())
	}
	fmt.Fprintf(w, "Example:\n%s\n", indent(c.example))
}

func indent(s string) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	for i, l := range lines {
		lines[i] = "  " + l
	}
	return strings.Join(lines, "\n")
}

// parseFlags parses args into fs, turning pflag's errors into usage errors.
func parseFlags(fs *flag.FlagSet, args []string) error {
	fs.SetOutput(io.Discard)
	if err := fs.Parse(args); err != nil {
		return usagef("%v", err)
	}
	// No number flag takes NaN or an infinity (strconv reads both), and a
	// range check such as x < 0 lets NaN through.
	var bad error
	fs.VisitAll(func(f *flag.Flag) {
		if bad != nil || f.Value.Type() != "float64" {
			return
		}
		if v, err := strconv.ParseFloat(f.Value.String(), 64); err == nil && (math.IsNaN(v) || math.IsInf(v, 0)) {
			bad = usagef("--%s %s: expected a finite number", f.Name, f.Value.String())
		}
	})
	return bad
}
