// Command plumbline finds leaks and blockages in water distribution
// networks from live telemetry. See README.md for the commands and
// DEVELOPERS.md for the architecture.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"sort"
	"syscall"
)

// command is one sub-command: its one-line job and its entry point. Run
// parses its own flags from args and writes results to stdout; an error
// is printed to stderr by main and gives a non-zero exit.
type command struct {
	summary string
	run     func(ctx context.Context, args []string, stdout, stderr io.Writer) error
}

// commands lists every sub-command (shared/CONTRACT.md).
func commands() map[string]command {
	return map[string]command{
		"demo":      {"zero-setup showcase: simulated town, detector, operator page", runDemo},
		"run":       {"the long-running service", runService},
		"check":     {"validate a configuration or network file", runCheck},
		"solve":     {"one steady-state hydraulic solve", runSolve},
		"simulate":  {"synthetic telemetry and ground truth from a scenario", runSimulate},
		"replay":    {"retrospective detection over stored or file readings", runReplay},
		"calibrate": {"fit roughness and demand parameters to stored readings", runCalibrate},
		"report":    {"retrospective report (HTML with plots)", runReport},
		"score":     {"detection quality of findings against ground truth", runScore},
		"gen":       {"generate a town-like network file of a given size", runGenerate},
	}
}

// errUsage marks an error already explained by the flag package's usage text.
var errUsage = errors.New("usage")

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := dispatch(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// dispatch runs the named command and returns the process exit code.
func dispatch(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	cmds := commands()
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		printUsage(stderr, cmds)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	c, ok := cmds[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "plumbline: unknown command %q\n", args[0])
		printUsage(stderr, cmds)
		return 2
	}
	if err := c.run(ctx, args[1:], stdout, stderr); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		if !errors.Is(err, errUsage) {
			fmt.Fprintf(stderr, "plumbline %s: %v\n", args[0], err)
		}
		return 1
	}
	return 0
}

func printUsage(w io.Writer, cmds map[string]command) {
	fmt.Fprintln(w, "usage: plumbline <command> [flags]   (plumbline <command> --help for its flags)")
	fmt.Fprintln(w, "\ncommands:")
	names := make([]string, 0, len(cmds))
	for n := range cmds {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(w, "  %-10s %s\n", n, cmds[n].summary)
	}
}

// newFlags returns a flag set for a command that prints its usage to
// stderr and returns errors instead of exiting.
func newFlags(name, synopsis string, stderr io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintf(stderr, "usage: plumbline %s %s\n\nflags:\n", name, synopsis)
		fs.PrintDefaults()
	}
	return fs
}

// parseFlags parses args, turning a flag error into errUsage (the flag
// package has already printed why) and -h into flag.ErrHelp.
func parseFlags(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return errUsage
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(fs.Output(), "unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return errUsage
	}
	return nil
}

// errNotBuilt is returned by commands whose implementation has not landed.
var errNotBuilt = errors.New("not built yet")
