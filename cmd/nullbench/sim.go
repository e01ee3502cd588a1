package main

import (
	"bufio"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"nullbench/instrument/sim"
)

// simInstrumentNames are the instruments of the simulated bench, any of
// which --serial may put on a pseudo-terminal.
func simInstrumentNames() []string {
	return []string{sim.NameDMM, sim.NameSupply, sim.NameSource, sim.NameSwitch, sim.NameChamber, sim.NameGen, sim.NameDig, sim.NameACVM}
}

type simOptions struct {
	Port      int
	Listen    string
	Serial    string
	BenchOut  string
	DUTFile   string
	Truth     bool
	TimeScale float64
	Seed      int64
	Socket    bool // read the person's hand-socket lines on standard input
	// DigMismatch is "DB,DEG", an extra gain and phase of the digitizer's
	// channel 2; "" for none.
	DigMismatch string
	Dialects    []string
}

func newSimCmd(std streams, run func(context.Context, streams, simOptions) error) *cobra.Command {
	var o simOptions
	cmd := &cobra.Command{
		Use:   "sim",
		Short: "Serve a simulated bench (meter, supply, source, switch matrix, chamber, generator, digitizer, AC voltmeter) on loopback",
		Long: `sim serves a whole simulated bench until interrupted: a DMM, a two-channel
supply, a three-channel DC source, a relay matrix, a temperature chamber, a
three-output function generator, a two-channel digitizer and an AC
voltmeter, each a SCPI instrument on its own TCP port, around a physical model of the
parts under test (an op-amp lot in a nulling loop and a finished board).
It prints one line per instrument with its role and address.

Point "nullbench probe" or a plan's bench section at those addresses;
--bench-out writes a matching bench section. The bench binds loopback only
unless --listen names another address.

--socket gives the bench a hand socket for plans whose units have no switch
channels, and makes you the person at the bench: type these lines on the
standard input of sim, each answered on standard output:

  insert ID   put unit ID (an id of the DUT file) into the socket
  remove      take the unit out of the socket
  status      the unit in the socket and the voltages on its contacts
  help        these words

Run "nullbench run" with such a plan in another terminal; when it asks for
the next unit, type "remove" and "insert ID" here, then confirm there. A
unit in the socket is measured whenever no switch channel is closed. As on
a real bench, a part inserted or removed while the socket is live (a supply
on, or an input driven) is damaged for good; the run only ever asks with
the bench powered down.

--dialect NAME[,NAME...] makes instruments speak another common dialect,
each with its own identity and profile name (the printed profile= and
--bench-out follow it; each dialect's built-in profile is named at the end
of its line, and instrument/profiles/README.md says what each shows):
` + dialectHelp(),
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return failed(run(cmd.Context(), std, o))
		},
	}
	f := cmd.Flags()
	f.IntVar(&o.Port, "port", 0, "TCP port of the first instrument (the others follow); 0 picks free ports")
	f.StringVar(&o.Listen, "listen", "127.0.0.1", "address to bind (loopback by default)")
	f.StringVar(&o.Serial, "serial", "", `serve this instrument on a pseudo-terminal instead of TCP ("dmm", "psu", "src", "mux", "chamber", "gen", "dig" or "acvm")`)
	f.StringVar(&o.BenchOut, "bench-out", "", "write the matching [bench] section of a plan to this file")
	f.StringVar(&o.DUTFile, "dut", "", "DUT file (TOML) with the true values of the simulated parts; default: the built-in demo lot")
	f.BoolVar(&o.Truth, "truth", false, "print each unit's true values as JSON lines and exit")
	f.Float64Var(&o.TimeScale, "time-scale", 1, "run the bench this many times faster than real time (plans must say the same time_scale)")
	f.Int64Var(&o.Seed, "seed", 0, "seed of the instruments' errors and noise (0: the DUT file's seed)")
	f.BoolVar(&o.Socket, "socket", false, `add a hand socket for units swapped by hand, worked by typing "insert ID", "remove" or "status" on standard input`)
	f.StringVar(&o.DigMismatch, "digitizer-mismatch", "", "DB,DEG: add this gain and phase to the digitizer's channel 2 (what a through calibration removes), e.g. 1,5")
	f.StringSliceVar(&o.Dialects, "dialect", nil, "make instruments speak these dialects (comma-separated, at most one per instrument; listed below)")
	_ = cmd.RegisterFlagCompletionFunc("dialect", cobra.FixedCompletions(sim.DialectNames(), cobra.ShellCompDirectiveNoFileComp))
	_ = cmd.RegisterFlagCompletionFunc("serial", cobra.FixedCompletions(simInstrumentNames(), cobra.ShellCompDirectiveNoFileComp))
	return cmd
}

// dialectHelp lists the simulated bench's dialects, one per line.
func dialectHelp() string {
	var sb strings.Builder
	for _, d := range sim.Dialects() {
		fmt.Fprintf(&sb, "\n  %-15s %-8s %s (profile %s)", d.Name, d.Instrument, d.Doc, d.Name)
	}
	return sb.String()
}

func loadDUT(path string) (*sim.DUTFile, error) {
	if path == "" {
		return sim.DefaultDUT(), nil
	}
	d, err := sim.LoadDUT(path)
	if err != nil {
		return nil, withCode(exitUsage, err)
	}
	return d, nil
}

func runSim(ctx context.Context, std streams, o simOptions) error {
	dut, err := loadDUT(o.DUTFile)
	if err != nil {
		return err
	}
	if o.TimeScale <= 0 {
		return withCode(exitUsage, fmt.Errorf("--time-scale must be positive, not %g", o.TimeScale))
	}
	if n := len(simInstrumentNames()); o.Port < 0 || o.Port > 65536-n {
		return withCode(exitUsage, fmt.Errorf("--port %d: give 0 for free ports, or the first of %d consecutive ports (1 … %d)", o.Port, n, 65536-n))
	}
	mis, err := parseMismatch(o.DigMismatch)
	if err != nil {
		return withCode(exitUsage, err)
	}
	if o.Serial != "" && !slices.Contains(simInstrumentNames(), o.Serial) {
		return withCode(exitUsage, fmt.Errorf("--serial %q: name one of the bench's instruments: %s", o.Serial, strings.Join(simInstrumentNames(), ", ")))
	}
	bench, err := sim.New(sim.Config{DUT: dut, TimeScale: o.TimeScale, Seed: o.Seed, DigitizerMismatch: mis, Dialects: o.Dialects})
	if err != nil {
		return withCode(exitUsage, err)
	}
	defer bench.Close()
	if o.Truth {
		enc := json.NewEncoder(std.Out)
		for _, t := range bench.Truth() {
			if err := enc.Encode(t); err != nil {
				return err
			}
		}
		return nil
	}
	if err := bench.Start(ctx, sim.ServeOptions{ListenHost: o.Listen, FirstPort: o.Port, SerialInstrument: o.Serial}); err != nil {
		return withCode(exitFailure, fmt.Errorf("start the simulated bench: %w", err))
	}
	for _, e := range bench.Endpoints() {
		fmt.Fprintf(std.Out, "%-8s %-8s %-50s profile=%s  %s\n", e.Name, e.Role, e.Address, e.Profile, e.IDN)
	}
	if o.BenchOut != "" {
		if err := os.WriteFile(o.BenchOut, []byte(bench.BenchSection()), 0o644); err != nil {
			return withCode(exitFailure, err)
		}
		fmt.Fprintf(std.Err, "bench section written to %s\n", o.BenchOut)
	}
	fmt.Fprintf(std.Err, "simulated bench running at %g× real time; Ctrl-C to stop\n", bench.TimeScale())
	if !o.Socket {
		<-ctx.Done()
		return nil
	}
	fmt.Fprintf(std.Err, "hand socket: type insert ID, remove, status or help, one per line\n")
	serveSocket(ctx, std, bench)
	return nil
}

// socketHands is what the socket lines need of the bench: the hands and
// eyes of the person at it (sim.Bench).
type socketHands interface {
	Insert(unitID string) error
	Remove() error
	SocketState() sim.SocketState
}

// serveSocket reads the person's lines from std.In and answers each on
// std.Out until ctx ends. When standard input closes, the bench keeps
// serving without a socket console until ctx ends.
func serveSocket(ctx context.Context, std streams, b socketHands) {
	lines := make(chan string)
	go func() {
		defer close(lines)
		sc := bufio.NewScanner(std.In)
		for sc.Scan() {
			select {
			case lines <- sc.Text():
			case <-ctx.Done():
				return
			}
		}
	}()
	for {
		select {
		case <-ctx.Done():
			return
		case line, ok := <-lines:
			if !ok {
				fmt.Fprintf(std.Err, "hand socket: standard input closed; the socket takes no more lines (the bench serves on; Ctrl-C to stop)\n")
				lines = nil
				continue
			}
			if reply := socketLine(b, line); reply != "" {
				fmt.Fprintln(std.Out, reply)
			}
		}
	}
}

// socketLine carries out one line typed at the hand socket and returns
// what to print ("" for a blank line). Words are case-insensitive; ids are
// as the DUT file spells them.
func socketLine(b socketHands, line string) string {
	f := strings.Fields(line)
	if len(f) == 0 {
		return ""
	}
	word := strings.ToLower(f[0])
	switch {
	case word == "insert" && len(f) == 2:
		id := f[1]
		err := b.Insert(id)
		switch {
		case errors.Is(err, sim.ErrLiveSocket):
			st := b.SocketState()
			return fmt.Sprintf("socket: %s inserted into a LIVE socket and DAMAGED (%s); power the bench down before swapping parts", id, st.Contacts)
		case err != nil:
			return "socket: refused: " + strings.TrimPrefix(err.Error(), "sim: ")
		}
		return fmt.Sprintf("socket: %s inserted", id)
	case word == "insert":
		return `socket: insert takes one unit id, e.g. "insert U01"`
	case word == "remove" && len(f) == 1:
		id := b.SocketState().Unit
		err := b.Remove()
		switch {
		case errors.Is(err, sim.ErrLiveSocket):
			st := b.SocketState()
			return fmt.Sprintf("socket: %s pulled out of a LIVE socket and DAMAGED (%s); power the bench down before swapping parts", id, st.Contacts)
		case err != nil:
			return "socket: refused: " + strings.TrimPrefix(err.Error(), "sim: ")
		}
		return fmt.Sprintf("socket: %s removed; the socket is empty", id)
	case word == "status" && len(f) == 1:
		st := b.SocketState()
		unit := "empty"
		if st.Unit != "" {
			unit = "holds " + st.Unit
			if st.Damaged {
				unit += " (DAMAGED: " + st.DamageReason + ")"
			}
		}
		live := "dead: safe to swap"
		if st.Live {
			live = "LIVE: do not swap until the bench is powered down"
		}
		return fmt.Sprintf("socket: %s; contacts %s; %s", unit, st.Contacts, live)
	case word == "help" || word == "?":
		return `socket: type "insert ID" (put unit ID in the socket), "remove" (take it out) or "status"`
	}
	return fmt.Sprintf(`socket: %q not understood; type "insert ID", "remove", "status" or "help"`, strings.TrimSpace(line))
}

// parseMismatch reads --digitizer-mismatch "DB,DEG" ("" is none).
func parseMismatch(s string) (sim.DigitizerMismatch, error) {
	if s == "" {
		return sim.DigitizerMismatch{}, nil
	}
	db, deg, ok := strings.Cut(s, ",")
	g, err1 := strconv.ParseFloat(strings.TrimSpace(db), 64)
	p, err2 := strconv.ParseFloat(strings.TrimSpace(deg), 64)
	if !ok || err1 != nil || err2 != nil || !(math.Abs(g) <= 20) || !(math.Abs(p) <= 180) {
		return sim.DigitizerMismatch{}, fmt.Errorf("--digitizer-mismatch %q: give DB,DEG within ±20 dB and ±180°, e.g. 1,5", s)
	}
	return sim.DigitizerMismatch{GainDB: g, PhaseDeg: p}, nil
}
