package report

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Plot size: 16 cm × 10 cm at 96 dpi is about 605 × 378 pixels.
const (
	plotWidth  = 16 * vg.Centimeter
	plotHeight = 10 * vg.Centimeter
)

// WritePlots writes PNG plots of the campaign into dir (created if needed)
// with the default ChartOptions and returns the files written, in order:
// per test, output change against stimulus with the fitted curves and the
// residuals (at the chart temperature); ratio against temperature (more
// than one temperature); the lot histogram of each test at each
// temperature with the limit marked; per frequency-response test and
// temperature, the Bode plots (ratio and phase against log frequency).
func WritePlots(dir string, c *Campaign) ([]string, error) {
	return WritePlotsWith(dir, c, ChartOptions{})
}

// WritePlotsWith is WritePlots with chart options.
func WritePlotsWith(dir string, c *Campaign, opt ChartOptions) ([]string, error) {
	if c == nil {
		return nil, errors.New("report: no campaign to plot")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("report: plot directory %q: %w", dir, err)
	}
	if _, err := RemoveStaleTemps(dir); err != nil {
		return nil, fmt.Errorf("report: plot directory %q: %w", dir, err)
	}
	plan := planCharts(c, opt)
	var files []string
	save := func(p *plot.Plot, name string) error {
		path := filepath.Join(dir, fmt.Sprintf("%02d-%s.png", len(files)+1, fileSafe(name)))
		if err := savePNG(p, path); err != nil {
			return err
		}
		files = append(files, path)
		return nil
	}
	for _, rc := range plan.Responses {
		p, err := responsePlot(rc, false)
		if err == nil {
			err = save(p, "response-"+rc.Test+sweepName(rc.Sweep)+"-"+tempName(rc.TemperatureC))
		}
		if err != nil {
			return files, err
		}
		p, err = responsePlot(rc, true)
		if err == nil {
			err = save(p, "residuals-"+rc.Test+sweepName(rc.Sweep)+"-"+tempName(rc.TemperatureC))
		}
		if err != nil {
			return files, err
		}
	}
	for _, tc := range plan.Temperatures {
		p, err := temperaturePlot(tc)
		if err == nil {
			err = save(p, "temperature-"+tc.Test)
		}
		if err != nil {
			return files, err
		}
	}
	for _, h := range plan.Histograms {
		p, err := histogramPlot(h)
		if err == nil {
			err = save(p, "histogram-"+h.Test+"-"+tempName(h.TemperatureC))
		}
		if err != nil {
			return files, err
		}
	}
	for _, b := range plan.Bodes {
		ps, err := bodePlots(b)
		if err != nil {
			return files, err
		}
		for i, p := range ps {
			kind := "bode-ratio-"
			if i == 1 {
				kind = "bode-phase-"
			}
			if err := save(p, kind+b.Test+"-"+tempName(b.TemperatureC)); err != nil {
				return files, err
			}
		}
	}
	return files, nil
}

func savePNG(p *plot.Plot, path string) (err error) {
	wt, err := p.WriterTo(plotWidth, plotHeight, "png")
	if err != nil {
		return fmt.Errorf("report: plot %q: %w", path, err)
	}
	if err := WriteFileAtomic(path, func(w io.Writer) error { _, err := wt.WriteTo(w); return err }); err != nil {
		return fmt.Errorf("report: plot %q: %w", path, err)
	}
	return nil
}

// fileSafe keeps letters, digits, '.', '_' and '-' of a name (test kinds
// are ours, but stay careful: names never become paths).
func fileSafe(s string) string {
	return strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '_', r == '-', r == '.':
			return r
		}
		return '_'
	}, s)
}

func sweepName(s string) string {
	if s == "" {
		return ""
	}
	return "-" + s
}

func tempName(t float64) string {
	s := fmt.Sprintf("%gC", t)
	if t < 0 {
		s = "m" + s[1:]
	}
	return s
}

func hexColour(h string) color.Color {
	var r, g, b uint8
	fmt.Sscanf(h, "%02x%02x%02x", &r, &g, &b)
	return color.RGBA{R: r, G: g, B: b, A: 255}
}

var glyphs = []draw.GlyphDrawer{
	draw.CircleGlyph{}, draw.BoxGlyph{}, draw.TriangleGlyph{}, draw.RingGlyph{},
	draw.CrossGlyph{}, draw.PyramidGlyph{}, draw.PlusGlyph{}, draw.SquareGlyph{},
}

var dashes = [][]vg.Length{nil, {vg.Points(5), vg.Points(3)}, {vg.Points(1), vg.Points(2)}, {vg.Points(6), vg.Points(2), vg.Points(1), vg.Points(2)}}

func newPlot(title, x, y string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = vg.Points(9)
	p.X.Label.Text = x
	p.Y.Label.Text = y
	p.Legend.Top = true
	p.Legend.Left = true
	p.Legend.TextStyle.Font.Size = vg.Points(7)
	p.Add(plotter.NewGrid())
	return p
}

// legendRoom raises the top of the y axis so the legend (top left, about
// 5 % of the axis height per entry at 7 pt) does not hide data.
func legendRoom(p *plot.Plot, entries int) {
	if entries == 0 || !(p.Y.Max > p.Y.Min) {
		return
	}
	frac := math.Min(0.055*float64(entries), 0.6)
	p.Y.Max += (p.Y.Max - p.Y.Min) * frac / (1 - frac)
}

func toXYs(pts []xy) plotter.XYs {
	out := make(plotter.XYs, 0, len(pts))
	for _, p := range pts {
		if !math.IsNaN(p.X) && !math.IsNaN(p.Y) && !math.IsInf(p.X, 0) && !math.IsInf(p.Y, 0) {
			out = append(out, plotter.XY{X: p.X, Y: p.Y})
		}
	}
	return out
}

func responsePlot(rc responseChart, residuals bool) (*plot.Plot, error) {
	title, yl := rc.title(), "Output change at meter (µV)"
	if residuals {
		title, yl = rc.residualTitle(), "Residual at meter (µV)"
	}
	p := newPlot(title, "Stimulus (V)", yl)
	if residuals {
		zero := plotter.NewFunction(func(float64) float64 { return 0 })
		zero.Color = color.Gray{Y: 96}
		p.Add(zero)
	}
	for i, s := range rc.Series {
		col := hexColour(seriesColours[i%len(seriesColours)])
		pts := s.Points
		if residuals {
			pts = s.Residuals
		}
		if xys := toXYs(pts); len(xys) > 0 {
			sc, err := plotter.NewScatter(xys)
			if err != nil {
				return nil, fmt.Errorf("report: plot %q unit %q: %w", title, s.Unit, err)
			}
			sc.Color, sc.Shape, sc.Radius = col, glyphs[i%len(glyphs)], vg.Points(2.5)
			p.Add(sc)
			p.Legend.Add(s.Unit, sc)
		}
		if residuals {
			continue
		}
		if xys := toXYs(s.Line); len(xys) > 1 {
			ln, err := plotter.NewLine(xys)
			if err != nil {
				return nil, fmt.Errorf("report: plot %q unit %q fit: %w", title, s.Unit, err)
			}
			ln.Color, ln.Width, ln.Dashes = col, vg.Points(1), dashes[i%len(dashes)]
			p.Add(ln)
		}
	}
	legendRoom(p, len(rc.Series))
	return p, nil
}

func temperaturePlot(tc tempChart) (*plot.Plot, error) {
	p := newPlot(tc.title(), "Temperature (°C)", "Reported ratio (dB)")
	for i, s := range tc.Series {
		xys := toXYs(s.Points)
		if len(xys) == 0 {
			continue
		}
		ln, sc, err := plotter.NewLinePoints(xys)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q unit %q: %w", tc.title(), s.Name, err)
		}
		col := hexColour(seriesColours[i%len(seriesColours)])
		ln.Color, ln.Dashes = col, dashes[i%len(dashes)]
		sc.Color, sc.Shape, sc.Radius = col, glyphs[i%len(glyphs)], vg.Points(2.5)
		p.Add(ln, sc)
		p.Legend.Add(s.Name, ln, sc)
	}
	if xys := toXYs(tc.Median); len(xys) > 0 {
		ln, err := plotter.NewLine(xys)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q lot median: %w", tc.title(), err)
		}
		ln.Color, ln.Width = color.Black, vg.Points(2.5)
		p.Add(ln)
		p.Legend.Add("lot median", ln)
	}
	if xys := toXYs(tc.Limit); len(xys) > 0 {
		ln, err := plotter.NewLine(xys)
		if err != nil {
			return nil, fmt.Errorf("report: plot %q limit: %w", tc.title(), err)
		}
		ln.Color, ln.Width, ln.Dashes = color.Black, vg.Points(1.5), []vg.Length{vg.Points(6), vg.Points(3)}
		p.Add(ln)
		p.Legend.Add("limit", ln)
	}
	legendRoom(p, len(tc.Series)+2)
	return p, nil
}

// histogramPlot draws all units (light orange, lower-bound-only units
// included) behind the resolved units (blue), so the orange part of a bar
// is the units known only by a bound, and the limit as a dashed black
// vertical line on a bin edge.
func histogramPlot(h histogram) (*plot.Plot, error) {
	p := newPlot(h.title(), "Reported ratio (dB)", "Units")
	all := &plotter.Histogram{Width: h.WidthDB, FillColor: hexColour("F5C99B"), LineStyle: draw.LineStyle{Color: color.Black, Width: vg.Points(0.5)}}
	res := &plotter.Histogram{Width: h.WidthDB, FillColor: hexColour("0072B2"), LineStyle: draw.LineStyle{Color: color.Black, Width: vg.Points(0.5)}}
	tallest := 0.0
	anyBound := false
	for i, lo := range h.Edges {
		hi := lo + h.WidthDB
		n := float64(h.Resolved[i] + h.BoundOnly[i])
		all.Bins = append(all.Bins, plotter.HistogramBin{Min: lo, Max: hi, Weight: n})
		res.Bins = append(res.Bins, plotter.HistogramBin{Min: lo, Max: hi, Weight: float64(h.Resolved[i])})
		tallest = math.Max(tallest, n)
		anyBound = anyBound || h.BoundOnly[i] > 0
	}
	if anyBound {
		p.Add(all)
		p.Legend.Add("lower bound only", all)
	}
	p.Add(res)
	p.Legend.Add("resolved", res)
	if !math.IsNaN(h.LimitDB) {
		ln, err := plotter.NewLine(plotter.XYs{{X: h.LimitDB, Y: 0}, {X: h.LimitDB, Y: math.Max(tallest, 1) * 1.05}})
		if err != nil {
			return nil, fmt.Errorf("report: plot %q limit: %w", h.title(), err)
		}
		ln.Color, ln.Width, ln.Dashes = color.Black, vg.Points(2), []vg.Length{vg.Points(6), vg.Points(3)}
		p.Add(ln)
		p.Legend.Add(fmt.Sprintf("limit %.2f dB", h.LimitDB), ln)
	}
	p.Y.Min = 0
	legendRoom(p, 3)
	return p, nil
}
