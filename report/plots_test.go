package report

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

func TestWritePlots(t *testing.T) {
	tests := []struct {
		name  string
		temps []float64
		opt   ChartOptions
		want  []string
	}{
		{"one temperature, no per-unit plots", single, ChartOptions{MaxUnits: -1}, []string{
			"01-histogram-cmrr-25C.png", "02-histogram-psrr_pos-25C.png",
		}},
		// cmrr only, to keep the suite quick: every kind of plot, the
		// response and residual plots at every temperature (the chart
		// temperature first).
		{"three temperatures, hostile unit ids", three, ChartOptions{MaxUnits: 4}, []string{
			"01-response-cmrr-25C.png", "02-residuals-cmrr-25C.png", "03-response-cmrr-m40C.png", "04-residuals-cmrr-m40C.png",
			"05-response-cmrr-85C.png", "06-residuals-cmrr-85C.png", "07-temperature-cmrr.png",
			"08-histogram-cmrr-m40C.png", "09-histogram-cmrr-25C.png", "10-histogram-cmrr-85C.png",
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			units := defaultUnits
			if tc.temps[0] != 25 {
				units = hostileUnits()
			}
			dir := filepath.Join(t.TempDir(), "plots") // created by WritePlots
			c := fixtureCampaign(units, tc.temps)
			if len(tc.temps) > 1 {
				onlyTest(c, "cmrr")
			}
			files, err := WritePlotsWith(dir, c, tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			var names []string
			for _, f := range files {
				if filepath.Dir(f) != dir {
					t.Errorf("%s written outside %s", f, dir)
				}
				names = append(names, filepath.Base(f))
			}
			if !slices.Equal(names, tc.want) {
				t.Fatalf("files %q, want %q", names, tc.want)
			}
			entries, _ := os.ReadDir(dir)
			if len(entries) != len(files) {
				t.Errorf("%d files in %s, reported %d", len(entries), dir, len(files))
			}
			for _, f := range files {
				checkPNG(t, f)
			}
		})
	}
}

// checkPNG decodes the header and the whole image: 16 cm × 10 cm at
// gonum/plot's default 96 dpi is 605 × 378 pixels (±2 for rounding), and
// a real plot is not one flat colour.
func checkPNG(t *testing.T, path string) {
	t.Helper()
	fh, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer fh.Close()
	cfg, format, err := image.DecodeConfig(fh)
	if err != nil || format != "png" {
		t.Fatalf("%s: not a PNG (%v, %q)", path, err, format)
	}
	if cfg.Width < 603 || cfg.Width > 607 || cfg.Height < 376 || cfg.Height > 380 {
		t.Errorf("%s: %d × %d px, want about 605 × 378", path, cfg.Width, cfg.Height)
	}
	fh.Seek(0, 0)
	img, err := png.Decode(fh)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	b := img.Bounds()
	colours := map[[4]uint32]bool{}
	for y := b.Min.Y; y < b.Max.Y; y += 7 {
		for x := b.Min.X; x < b.Max.X; x += 7 {
			r, g, bl, a := img.At(x, y).RGBA()
			colours[[4]uint32{r, g, bl, a}] = true
		}
	}
	if len(colours) < 3 {
		t.Errorf("%s: only %d colours: an empty plot", path, len(colours))
	}
}

func TestWritePlotsErrors(t *testing.T) {
	if _, err := WritePlots(t.TempDir(), nil); err == nil {
		t.Error("no error for a nil campaign")
	}
	file := filepath.Join(t.TempDir(), "file")
	os.WriteFile(file, nil, 0o644)
	if _, err := WritePlots(filepath.Join(file, "sub"), fixtureCampaign(defaultUnits, single)); err == nil {
		t.Error("no error when the directory cannot be made")
	}
}

func TestFileSafe(t *testing.T) {
	for in, want := range map[string]string{"cmrr": "cmrr", "../x": ".._x", "a b/c": "a_b_c", "psrr_pos-25C": "psrr_pos-25C"} {
		if got := fileSafe(in); got != want {
			t.Errorf("fileSafe(%q) = %q, want %q", in, got, want)
		}
	}
}

// onlyTest keeps one test kind's rows.
func onlyTest(c *Campaign, test string) {
	c.Results = slices.DeleteFunc(c.Results, func(r Result) bool { return r.Test != test })
	c.Fits = slices.DeleteFunc(c.Fits, func(r FitRow) bool { return r.Test != test })
	c.Readings = slices.DeleteFunc(c.Readings, func(r Reading) bool { return r.Test != test })
	c.LotStats = slices.DeleteFunc(c.LotStats, func(r LotRow) bool { return r.Test != test })
}
