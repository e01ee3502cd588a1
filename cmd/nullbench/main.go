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
	exitProblems    = 6 // the measurement ran, none failed, but some results could not be formed or judged (analysis problems)
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
	// Ctrl-C, kill, and a closed terminal or ssh session (SIGHUP) all
	// cancel the context, so a run brings the bench to its safe state.
	// SIGPIPE is ignored: a closed output pipe (| tee, | head) then gives
	// write errors, which the progress lines ignore, instead of killing the
	// process with the supplies on.
	signal.Ignore(syscall.SIGPIPE)
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM, syscall.SIGHUP)
	defer stop()
	std := streams{In: os.Stdin, Out: os.Stdout, Err: os.Stderr, IsTerm: isTerminal(os.Stdin) && isTerminal(os.Stderr)}
	return execute(ctx, std, os.Args[1:])
}

// execute runs the command line args (without the program name) with the
// given streams and returns the exit status; an error is printed on std.Err.
func execute(ctx context.Context, std streams, args []string) int {
	root := newRootCmd(std)
	if args == nil {
		args = []string{} // nil would make cobra read os.Args
	}
	root.SetArgs(args)
	return exitStatus(std.Err, root.ExecuteContext(ctx))
}

// exitStatus prints err and maps it to an exit code: the code an exitError
// carries, else exitUsage (cobra's own errors: unknown command or flag,
// bad flag value, wrong number of arguments, missing required flag).
func exitStatus(w io.Writer, err error) int {
	if err == nil {
		return exitOK
	}
	fmt.Fprintln(w, "nullbench:", err)
	var ee *exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	return exitUsage
}

// failed marks an error returned by a verb that carries no exit code as a
// plain failure (exitFailure): only cobra's parsing errors, which never reach
// a verb, default to exitUsage.
func failed(err error) error {
	var ee *exitError
	if err == nil || errors.As(err, &ee) {
		return err
	}
	return withCode(exitFailure, err)
}

// verbs are the functions the commands call with their parsed options.
// newRootCmd wires the real ones; tests substitute recorders to see how a
// command line is parsed.
type verbs struct {
	demo   func(context.Context, streams, demoOptions) error
	sim    func(context.Context, streams, simOptions) error
	probe  func(context.Context, streams, probeOptions) error
	check  func(context.Context, streams, checkOptions) error
	run    func(context.Context, streams, runOptions) error
	resume func(context.Context, streams, resumeOptions) error
	report func(context.Context, streams, reportOptions) error
	fit    func(context.Context, streams, fitOptions) error
	off    func(context.Context, streams, offOptions) error
	size   func(context.Context, streams, sizeOptions) error
}

func defaultVerbs() verbs {
	return verbs{
		demo:   runDemo,
		sim:    runSim,
		probe:  runProbe,
		check:  func(_ context.Context, std streams, o checkOptions) error { return runCheck(std, o) },
		run:    runRun,
		resume: runResume,
		report: func(_ context.Context, std streams, o reportOptions) error { return runReport(std, o) },
		fit:    func(_ context.Context, std streams, o fitOptions) error { return runFit(std, o) },
		off:    runOff,
		size:   func(_ context.Context, std streams, o sizeOptions) error { return runSize(std, o) },
	}
}

func newRootCmd(std streams) *cobra.Command { return newRootCmdWith(std, defaultVerbs()) }

func newRootCmdWith(std streams, v verbs) *cobra.Command {
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
		newDemoCmd(std, v.demo),
		newSimCmd(std, v.sim),
		newProbeCmd(std, v.probe),
		newCheckCmd(std, v.check),
		newRunCmd(std, v.run),
		newResumeCmd(std, v.resume),
		newReportCmd(std, v.report),
		newFitCmd(std, v.fit),
		newOffCmd(std, v.off),
		newSizeCmd(std, v.size),
		newArchiveCmd(std),
	)
	return root
}
