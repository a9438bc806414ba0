// Command sawmill grows random forests, inspects tree ensembles, scores
// rows with the reference interpreter, and compiles ensembles into
// dependency-free Go, C and SQL.
package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/spf13/cobra"
)

func main() { os.Exit(run(os.Args[1:], os.Stdin, os.Stdout, os.Stderr)) }

// commands builds each subcommand afresh. Adding a command is one line here.
var commands = []func() *cobra.Command{
	newTrainCmd,
	newPredictCmd,
	newInspectCmd,
	newCompileCmd,
	newVerifyCmd,
	newDemoCmd,
	newImportCmd,
}

// Exit codes.
const (
	exitOK    = 0
	exitError = 1 // the work failed: bad input, unreadable file, ...
	exitUsage = 2 // the command line itself is wrong
)

// usageError marks a mistake in the command line rather than in the work.
type usageError struct{ err error }

func (e usageError) Error() string { return e.err.Error() }
func (e usageError) Unwrap() error { return e.err }

// run is the whole program: it parses args, runs one command, and reports an
// error as "sawmill: ..." on stderr. It reads and writes only through the
// given streams, so tests call it in-process.
func run(args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	root := &cobra.Command{
		Use:   "sawmill",
		Short: "Grow, inspect, score and compile tree ensembles",
		Long: `sawmill turns a trained tree ensemble into plain source code that needs no
runtime (Go, C and SQL), grows random forests itself, and proves row by row
that what it emitted scores exactly like the model.`,
		Example: `  sawmill train pumps.csv --label state -o pump-health.json
  sawmill inspect pump-health.json
  sawmill predict pump-health.json readings.csv --keep pump_id`,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetArgs(args)
	root.SetIn(stdin)
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return usageError{fmt.Errorf("%s: %w\nhint: see '%s -h'", c.CommandPath(), err, c.CommandPath())}
	})
	root.CompletionOptions.DisableDefaultCmd = true
	for _, newCmd := range commands {
		c := newCmd()
		c.SilenceUsage, c.SilenceErrors = true, true
		root.AddCommand(c)
	}
	if c, err := root.ExecuteC(); err != nil {
		msg := err.Error()
		if !strings.HasPrefix(msg, "sawmill ") { // "sawmill train: ..." names the program already
			msg = "sawmill: " + msg
		}
		fmt.Fprintln(stderr, msg)
		var ue usageError
		if errors.As(err, &ue) || c == root { // an unknown command or a misuse of flags
			return exitUsage
		}
		return exitError
	}
	return exitOK
}

// exactArgs is cobra.ExactArgs with sawmill's wording, as a usage error.
func exactArgs(n int, what string) cobra.PositionalArgs {
	return func(c *cobra.Command, args []string) error {
		if len(args) != n {
			return usageError{fmt.Errorf("%s: expected %s, got %d argument(s)\nhint: see '%s -h'", c.CommandPath(), what, len(args), c.CommandPath())}
		}
		return nil
	}
}
