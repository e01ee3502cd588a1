package main

import (
	"fmt"
	"io"
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
