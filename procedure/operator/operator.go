package operator

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"sync"

	"nullbench/procedure/plan"
)

// Operator is the person at the bench, for the steps a program cannot do:
// swapping parts by hand and reading a temperature off a gauge. cmd
// implements it on a terminal; without a terminal, plans that need it are
// refused before the run starts (see NeedsOperator).
type Operator interface {
	// SwapUnit is called with the bench powered down (inputs at 0 V,
	// supplies off): the operator removes the part in the socket, inserts
	// next and confirms. It returns the id the operator read off the part;
	// "" means "the unit the plan names". A different id is refused by the
	// run (the journal and the resume keys use the plan's ids).
	SwapUnit(ctx context.Context, next plan.Unit) (id string, err error)
	// Temperature is called once at the start of each temperature pass in
	// the manual and thermometer modes. The operator brings the bench to
	// req.PointCelsius (or confirms the room temperature) and, when
	// req.Typed (manual mode), types the temperature read off a gauge; in
	// thermometer mode the answer is ignored and the thermometer is read
	// at every point.
	Temperature(ctx context.Context, req TemperatureRequest) (celsius float64, err error)
}

// TemperatureRequest is what Operator.Temperature asks for.
type TemperatureRequest struct {
	PointCelsius float64 // the plan's temperature for this pass (ambient_c when it lists none)
	Index, Of    int     // pass number from 1, and the number of passes
	Typed        bool    // manual mode: the operator types the temperature
}

// NeedsOperator says why the plan needs an Operator ("" when it does not):
// units swapped by hand (no switch channels) or a manual temperature mode
// or thermometer mode with several points. cmd refuses such plans when it
// has no terminal to ask on.
func NeedsOperator(p *plan.Plan) string {
	if HandSwap(p) {
		return "the units have no switch channels, so the operator swaps them by hand"
	}
	for i, t := range p.ACTests {
		if t.Through == plan.ThroughManual {
			return fmt.Sprintf("ac_test[%d] has through = \"manual\": the operator moves the channel-2 probe", i+1)
		}
	}
	switch p.Temperature.Mode {
	case plan.TempManual:
		return "temperature.mode = \"manual\": the operator types each temperature"
	case plan.TempThermometer:
		if len(p.Temperature.PointsCelsius) > 1 {
			return "temperature.mode = \"thermometer\" with several points: the operator brings the bench to each"
		}
	}
	return ""
}

// HandSwap reports whether the plan's units are swapped by hand: no unit
// has a switch channel (validation refuses a mix). A plan with a single
// unit and no channel needs one swap: the operator inserts that unit.
func HandSwap(p *plan.Plan) bool {
	for _, u := range p.Units {
		if u.Channel != "" {
			return false
		}
	}
	return len(p.Units) > 0
}

// LineOperator is an Operator on a line-oriented terminal: it prints a
// prompt on Out and reads the answer, one line, from In. cmd uses it when
// standard input is a terminal. An answer of "q" or "quit" stops the run
// (the bench is then brought to its safe state). Reading stops when ctx
// ends, so Ctrl-C works while the operator is asked.
type LineOperator struct {
	In  io.Reader
	Out io.Writer

	once  sync.Once
	lines chan lineRead
}

type lineRead struct {
	text string
	err  error
}

// ErrOperatorStop is returned when the operator asks to stop.
var ErrOperatorStop = errors.New("the operator stopped the run")

// readLine returns the next line of In, or ctx's error. The reading
// goroutine outlives a cancelled call (a terminal read cannot be
// interrupted); the next call gets the line it reads.
func (o *LineOperator) readLine(ctx context.Context) (string, error) {
	o.once.Do(func() {
		o.lines = make(chan lineRead)
		go func() {
			sc := bufio.NewScanner(o.In)
			for sc.Scan() {
				o.lines <- lineRead{text: sc.Text()}
			}
			err := sc.Err()
			if err == nil {
				err = io.EOF
			}
			for {
				o.lines <- lineRead{err: err}
			}
		}()
	})
	select {
	case l := <-o.lines:
		if l.err != nil {
			return "", fmt.Errorf("reading the operator's answer: %w", l.err)
		}
		t := strings.TrimSpace(l.text)
		if strings.EqualFold(t, "q") || strings.EqualFold(t, "quit") {
			return "", ErrOperatorStop
		}
		return t, nil
	case <-ctx.Done():
		return "", ctx.Err()
	}
}

// SwapUnit asks for the next unit and returns the id typed (Enter confirms
// the planned one).
func (o *LineOperator) SwapUnit(ctx context.Context, next plan.Unit) (string, error) {
	fmt.Fprintf(o.Out, "\nThe bench is powered down (inputs at 0 V, supplies off).\nInsert unit %s", next.ID)
	if next.Notes != "" {
		fmt.Fprintf(o.Out, " (%s)", next.Notes)
	}
	fmt.Fprintf(o.Out, ", then press Enter, or type the id on the part [%s] (skip REASON leaves it out, q stops): ", next.ID)
	t, err := o.readLine(ctx)
	if err != nil {
		return "", err
	}
	if f := strings.Fields(t); len(f) > 0 && strings.EqualFold(f[0], "skip") {
		reason := strings.TrimSpace(t[len(f[0]):])
		if reason == "" {
			reason = "skipped by the operator"
		}
		return "", &SkipUnitError{Unit: next.ID, Reason: reason}
	}
	return t, nil
}

// MoveProbe shows msg and waits for Enter (q stops): the manual through
// calibration of a frequency-response test.
func (o *LineOperator) MoveProbe(ctx context.Context, msg string) error {
	fmt.Fprintf(o.Out, "\n%s, then press Enter (q stops): ", msg)
	_, err := o.readLine(ctx)
	return err
}

// Temperature asks for a temperature (manual mode) or a confirmation
// (thermometer mode). A typed answer must be a number of °C ("24.6",
// "24.6 C" and "24.6 °C" are accepted); a wrong one is asked again.
func (o *LineOperator) Temperature(ctx context.Context, req TemperatureRequest) (float64, error) {
	if !req.Typed {
		fmt.Fprintf(o.Out, "\nTemperature %d of %d: bring the bench to %g °C, then press Enter (q stops): ", req.Index, req.Of, req.PointCelsius)
		_, err := o.readLine(ctx)
		return math.NaN(), err
	}
	fmt.Fprintf(o.Out, "\nTemperature %d of %d: bring the bench to %g °C and type the temperature read at the part, in °C (q stops): ", req.Index, req.Of, req.PointCelsius)
	for {
		t, err := o.readLine(ctx)
		if err != nil {
			return 0, err
		}
		t = strings.TrimSpace(strings.TrimSuffix(strings.TrimSuffix(strings.TrimSuffix(t, "C"), "c"), "°"))
		c, perr := strconv.ParseFloat(t, 64)
		if perr == nil && !math.IsNaN(c) && !math.IsInf(c, 0) && c >= -273.15 {
			return c, nil
		}
		fmt.Fprintf(o.Out, "%q is not a temperature in °C; type a number such as 24.6: ", t)
	}
}

// ThroughOperator is an Operator that can also be asked to move the
// digitizer's channel-2 probe for a manual through calibration
// (through = "manual"). LineOperator implements it.
type ThroughOperator interface {
	// MoveProbe shows msg (what to connect where) and returns when the
	// operator confirms.
	MoveProbe(ctx context.Context, msg string) error
}

// SkipUnitError is what an Operator returns from SwapUnit to leave the
// unit out (socket empty, part cracked): the run journals a unit-skipped
// event with Reason and goes on with the next unit. A skipped unit is
// not measured at any later temperature either, and a resumed run keeps
// it skipped; the report shows it as skipped, not failed.
type SkipUnitError struct {
	Unit   string
	Reason string
}

func (e *SkipUnitError) Error() string {
	return fmt.Sprintf("unit %s skipped: %s", e.Unit, e.Reason)
}

// SkipReason says whether err asks to skip the unit, and why.
func SkipReason(err error) (string, bool) {
	var se *SkipUnitError
	if errors.As(err, &se) {
		return se.Reason, true
	}
	return "", false
}
