package clock

import (
	"context"
	"errors"
	"testing"
	"time"
)

func TestScaledClock(t *testing.T) {
	for _, tc := range []struct {
		scale, want float64
	}{{200, 200}, {1, 1}, {0, 1}, {-3, 1}} {
		c := NewScaled(tc.scale).(*scaledClock)
		if c.scale != tc.want {
			t.Errorf("NewScaled(%g): scale %g, want %g", tc.scale, c.scale, tc.want)
		}
	}
	c := NewScaled(1000)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	// A cancelled context ends a sleep at once, whatever its length.
	if err := c.Sleep(ctx, time.Hour); !errors.Is(err, context.Canceled) {
		t.Errorf("Sleep on a cancelled context: %v", err)
	}
	if err := c.Sleep(context.Background(), 0); err != nil {
		t.Errorf("Sleep(0): %v", err)
	}
	a := c.Now()
	if err := c.Sleep(context.Background(), time.Second); err != nil { // 1 ms of wall time
		t.Fatal(err)
	}
	if b := c.Now(); b-a < time.Second {
		t.Errorf("after Sleep(1 s) of bench time the clock moved %v", b-a)
	}
}

func TestManualAndOffsetClock(t *testing.T) {
	var m Manual
	if err := m.Sleep(context.Background(), 90*time.Second); err != nil || m.Now() != 90*time.Second {
		t.Fatalf("Sleep: %v, now %v", err, m.Now())
	}
	m.Advance(-time.Second)
	if m.Now() != 90*time.Second {
		t.Errorf("negative advance moved the clock to %v", m.Now())
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := m.Sleep(ctx, time.Second); err == nil || m.Now() != 90*time.Second {
		t.Errorf("Sleep on a cancelled context: %v, now %v", err, m.Now())
	}
	o := Offset(&m, time.Hour)
	if o.Now() != time.Hour+90*time.Second {
		t.Errorf("offset clock reads %v", o.Now())
	}
}
