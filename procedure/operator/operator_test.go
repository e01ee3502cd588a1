package operator

import (
	"bytes"
	"context"
	"errors"
	"io"
	"strings"
	"testing"

	"nullbench/procedure/plan"
)

func TestLineOperator(t *testing.T) {
	cases := []struct {
		name   string
		input  string
		ask    func(o *LineOperator) (any, error)
		want   any
		err    error
		prompt string
	}{
		{"swap: Enter confirms", "\n", func(o *LineOperator) (any, error) { return o.SwapUnit(context.Background(), plan.Unit{ID: "U03"}) }, "", nil, "Insert unit U03"},
		{"swap: id typed", "  U04 \n", func(o *LineOperator) (any, error) { return o.SwapUnit(context.Background(), plan.Unit{ID: "U03"}) }, "U04", nil, "[U03]"},
		{"swap: quit", "q\n", func(o *LineOperator) (any, error) { return o.SwapUnit(context.Background(), plan.Unit{ID: "U03"}) }, "", ErrOperatorStop, ""},
		{"temperature typed after a wrong answer", "warm\n24.6 °C\n", func(o *LineOperator) (any, error) {
			return o.Temperature(context.Background(), TemperatureRequest{PointCelsius: 25, Index: 1, Of: 2, Typed: true})
		}, 24.6, nil, "not a temperature"},
		{"temperature below absolute zero refused", "-300\n-40\n", func(o *LineOperator) (any, error) {
			return o.Temperature(context.Background(), TemperatureRequest{PointCelsius: -40, Index: 2, Of: 2, Typed: true})
		}, -40.0, nil, "bring the bench to -40 °C"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			var out strings.Builder
			o := &LineOperator{In: strings.NewReader(tc.input), Out: &out}
			got, err := tc.ask(o)
			if !errors.Is(err, tc.err) {
				t.Fatalf("err %v, want %v", err, tc.err)
			}
			if err == nil && got != tc.want {
				t.Errorf("got %v, want %v", got, tc.want)
			}
			if !strings.Contains(out.String(), tc.prompt) {
				t.Errorf("prompt %q lacks %q", out.String(), tc.prompt)
			}
		})
	}
	t.Run("end of input", func(t *testing.T) {
		o := &LineOperator{In: strings.NewReader(""), Out: &strings.Builder{}}
		if _, err := o.SwapUnit(context.Background(), plan.Unit{ID: "U01"}); err == nil {
			t.Fatal("no error at end of input")
		}
	})
	t.Run("cancelled while waiting", func(t *testing.T) {
		r, w := io.Pipe()
		defer w.Close()
		o := &LineOperator{In: r, Out: &strings.Builder{}}
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		if _, err := o.SwapUnit(ctx, plan.Unit{ID: "U01"}); !errors.Is(err, context.Canceled) {
			t.Fatalf("err %v", err)
		}
	})
}

// At a hand-swap prompt the operator types "skip REASON".
func TestLineOperatorSkip(t *testing.T) {
	for _, tc := range []struct{ input, reason string }{
		{"skip part cracked\n", "part cracked"},
		{"SKIP\n", "skipped by the operator"},
	} {
		var out bytes.Buffer
		o := &LineOperator{In: bytes.NewBufferString(tc.input), Out: &out}
		_, err := o.SwapUnit(context.Background(), plan.Unit{ID: "U03"})
		reason, ok := SkipReason(err)
		if !ok || reason != tc.reason {
			t.Errorf("%q: err %v, want a skip with reason %q", tc.input, err, tc.reason)
		}
		if !bytes.Contains(out.Bytes(), []byte("skip REASON leaves it out")) {
			t.Errorf("the prompt does not offer skip: %s", out.String())
		}
	}
}
