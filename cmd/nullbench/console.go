package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"

	"nullbench/procedure"
)

// newProgress returns a progress bar on a terminal and plain log lines
// otherwise (one line per finished sweep and per event).
func newProgress(w io.Writer, isTerm bool) procedure.Progress {
	if isTerm {
		return &barProgress{w: w}
	}
	return &lineProgress{w: w}
}

type lineProgress struct{ w io.Writer }

func (p *lineProgress) Begin(total, done int) {
	fmt.Fprintf(p.w, "campaign: %d points, %d already in the journal\n", total, done)
}

func (p *lineProgress) Point(pi procedure.PointInfo) {
	if pi.Step != pi.Steps-1 {
		return
	}
	fmt.Fprintf(p.w, "%s  unit %-6s %-14s %6.1f °C  repeat %d  done %d/%d  left %s\n",
		time.Now().UTC().Format("15:04:05"), pi.Unit, sweepName(pi), pi.TemperatureC, pi.Repeat+1,
		pi.Done, pi.Total, pi.LeftWall.Round(time.Second))
}

func (p *lineProgress) Note(msg string) {
	fmt.Fprintf(p.w, "%s  %s\n", time.Now().UTC().Format("15:04:05"), msg)
}

func (p *lineProgress) End() {}

type barProgress struct {
	w   io.Writer
	bar *progressbar.ProgressBar
}

func (p *barProgress) Begin(total, done int) {
	p.bar = progressbar.NewOptions(total,
		progressbar.OptionSetWriter(p.w),
		progressbar.OptionSetWidth(30),
		progressbar.OptionShowCount(),
		progressbar.OptionSetItsString("points"),
		progressbar.OptionClearOnFinish(),
		progressbar.OptionThrottle(100*time.Millisecond),
	)
	_ = p.bar.Set(done)
}

func (p *barProgress) Point(pi procedure.PointInfo) {
	if p.bar == nil {
		return
	}
	p.bar.Describe(fmt.Sprintf("%-6s %-14s %6.1f°C step %2d/%-2d left %-8s",
		pi.Unit, sweepName(pi), pi.TemperatureC, pi.Step+1, pi.Steps, pi.LeftWall.Round(time.Second)))
	_ = p.bar.Set(pi.Done)
}

func (p *barProgress) Note(msg string) {
	if p.bar != nil {
		_ = p.bar.Clear()
	}
	fmt.Fprintln(p.w, msg)
}

func (p *barProgress) End() {
	if p.bar != nil {
		_ = p.bar.Finish()
		fmt.Fprintln(p.w)
	}
}

func sweepName(pi procedure.PointInfo) string {
	if pi.Part != "" {
		return pi.Test + "/" + pi.Part
	}
	return pi.Test
}

// termOperator asks the person at the terminal to swap units and to type
// temperatures.
type termOperator struct {
	in  *bufio.Reader
	out io.Writer
}

func newTermOperator(in io.Reader, out io.Writer) *termOperator {
	return &termOperator{in: bufio.NewReader(in), out: out}
}

func (o *termOperator) ask(ctx context.Context, prompt string) (string, error) {
	fmt.Fprint(o.out, prompt)
	type answer struct {
		s   string
		err error
	}
	ch := make(chan answer, 1)
	go func() {
		s, err := o.in.ReadString('\n')
		ch <- answer{strings.TrimSpace(s), err}
	}()
	select {
	case <-ctx.Done():
		return "", ctx.Err()
	case a := <-ch:
		if a.err != nil && a.s == "" {
			return "", fmt.Errorf("no answer from the operator: %w", a.err)
		}
		return a.s, nil
	}
}

func (o *termOperator) SwapUnit(ctx context.Context, next procedure.Unit) (string, error) {
	fmt.Fprintf(o.out, "\nThe bench is powered down (inputs at 0 V, supplies off).\n")
	fmt.Fprintf(o.out, "Remove the part in the fixture and insert unit %s.\n", next.ID)
	return o.ask(ctx, fmt.Sprintf("Type the id read off the part and press Enter (Enter alone = %s): ", next.ID))
}

func (o *termOperator) Temperature(ctx context.Context, req procedure.TemperatureRequest) (float64, error) {
	fmt.Fprintf(o.out, "\nTemperature pass %d of %d: bring the part to %.1f °C.\n", req.Index, req.Of, req.PointCelsius)
	if !req.Typed {
		_, err := o.ask(ctx, "Press Enter when it has soaked: ")
		return req.PointCelsius, err
	}
	for {
		s, err := o.ask(ctx, "Type the temperature read off the gauge, °C: ")
		if err != nil {
			return 0, err
		}
		v, perr := strconv.ParseFloat(strings.TrimSpace(s), 64)
		if perr == nil {
			return v, nil
		}
		fmt.Fprintf(o.out, "%q is not a number; type for example 24.8\n", s)
	}
}
