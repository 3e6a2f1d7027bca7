// Package cli holds the commands of the soak binary. Each command parses
// its flags, calls the packages that do the work, and turns errors into
// messages and exit codes.
package cli

import (
	"context"
	"errors"
	"fmt"
	"io"

	"github.com/spf13/cobra"
)

// Exit codes shared by every command.
const (
	ExitOK = 0
	// ExitFailure: the job ran but failed, or a server call failed.
	ExitFailure = 1
	// ExitUsage: the command line or the spec is wrong.
	ExitUsage = 2
	// ExitCancelled: the job or the command was cancelled.
	ExitCancelled = 3
)

// exitError carries an exit code up to Main.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// withCode marks err with the exit code the process should end with.
func withCode(code int, err error) error {
	if err == nil {
		return nil
	}
	return &exitError{code: code, err: err}
}

// streams are the process's standard streams, passed down to commands so
// tests can capture them.
type streams struct {
	in       io.Reader
	out, err io.Writer
}

// Main runs the soak command line and returns the process exit code.
func Main(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) int {
	s := streams{in: stdin, out: stdout, err: stderr}
	root := newRoot(s)
	root.SetArgs(args)
	root.SetIn(stdin)
	root.SetOut(stdout)
	root.SetErr(stderr)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return ExitOK
	}
	fmt.Fprintln(stderr, "soak:", err)
	var ee *exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	if errors.Is(err, context.Canceled) {
		return ExitCancelled
	}
	// Errors cobra raises itself are command-line mistakes.
	return ExitUsage
}

func newRoot(s streams) *cobra.Command {
	root := &cobra.Command{
		Use:           "soak",
		Short:         "Heat-up and cool-down times of solid parts, computed in 3-D",
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	// One constructor per command; each lives in its own file.
	root.AddCommand(
		newRunCmd(s),
		newEstimateCmd(s),
		newSubmitCmd(s), newWatchCmd(s), newJobsCmd(s), newCancelCmd(s), newFetchCmd(s), newDemoCmd(s),
		newServeCmd(s), newSchedulerCmd(s), newWorkerCmd(s), newBrokerCmd(s), newTokenCmd(s),
		newBenchCmd(s),
	)
	return root
}
