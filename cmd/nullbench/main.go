// Command nullbench measures the common-mode and supply rejection of
// op-amps and amplifier boards on ordinary SCPI bench instruments, fits the
// changes with a GUM uncertainty budget, judges each part against its
// limits and writes the campaign into a workbook.
//
// main only wires cobra; every verb lives in its own file with an options
// struct and a run function that tests call directly.
package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"github.com/spf13/cobra"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

// Exit codes. Scripts rely on them; never renumber.
const (
	exitOK          = 0
	exitFailure     = 1 // anything not listed below
	exitUsage       = 2 // bad flags, arguments or plan file
	exitInstrument  = 3 // an instrument fault, time-out or lost connection
	exitSafety      = 4 // a plan refused as unsafe
	exitOutOfLimits = 5 // the measurement ran and at least one result failed its limit
)

// exitError carries an exit code through cobra's error return.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

func withCode(code int, err error) error {
	if err == nil {
		return nil
	}
	return &exitError{code: code, err: err}
}

// streams are the standard streams, injected so tests can capture them.
type streams struct {
	In     io.Reader
	Out    io.Writer
	Err    io.Writer
	IsTerm bool // standard input and error are an interactive terminal
}

func main() { os.Exit(run()) }

func run() int {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	std := streams{In: os.Stdin, Out: os.Stdout, Err: os.Stderr, IsTerm: isTerminal(os.Stdin) && isTerminal(os.Stderr)}
	root := newRootCmd(std)
	err := root.ExecuteContext(ctx)
	if err == nil {
		return exitOK
	}
	fmt.Fprintln(os.Stderr, "nullbench:", err)
	var ee *exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	return exitUsage
}

func newRootCmd(std streams) *cobra.Command {
	root := &cobra.Command{
		Use:   "nullbench",
		Short: "Measure CMRR and PSRR of op-amps and amplifier boards on SCPI bench instruments",
		Long: `nullbench steps a common-mode source or a supply through a safe,
drift-cancelling sequence, records the change at the output with a DC meter,
fits the changes into µV/V and dB with a GUM uncertainty budget, judges each
part against its limits with a stated ILAC-G8 decision rule, and writes the
campaign into a spreadsheet workbook.

Start with "nullbench demo": it runs a whole campaign on a simulated bench.`,
		Version:       version,
		SilenceUsage:  true,
		SilenceErrors: true,
	}
	root.SetIn(std.In)
	root.SetOut(std.Out)
	root.SetErr(std.Err)
	root.AddCommand(
		newDemoCmd(std),
		newSimCmd(std),
		newProbeCmd(std),
		newCheckCmd(std),
		newRunCmd(std),
		newResumeCmd(std),
		newReportCmd(std),
		newFitCmd(std),
	)
	return root
}
