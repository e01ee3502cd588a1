package instrumenttest_test

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"reflect"
	"strings"
	"testing"

	"nullbench/instrument"
	pb "nullbench/instrument/instrumenttest"
)

// fakeT records what a Playback reports instead of failing the real test.
type fakeT struct {
	testing.TB
	errs     []string
	cleanups []func()
}

func (f *fakeT) Helper() {}
func (f *fakeT) Errorf(format string, args ...any) {
	f.errs = append(f.errs, fmt.Sprintf(format, args...))
}
func (f *fakeT) Cleanup(fn func()) { f.cleanups = append(f.cleanups, fn) }
func (f *fakeT) runCleanups() {
	for i := len(f.cleanups) - 1; i >= 0; i-- {
		f.cleanups[i]()
	}
}

var script = []pb.Exchange{
	{Comment: "identify", Send: "*IDN?", Reply: "NULLBENCH-SIM,DMM-65,SIM0001,1.0"},
	{Comment: "set range", Send: "CONF:VOLT:DC 10"},
	{Comment: "check errors", Send: "SYST:ERR?", Reply: `0,"No error"`},
}

func TestPlaybackFollowsScript(t *testing.T) {
	ctx := context.Background()
	ft := &fakeT{TB: t}
	conn := pb.NewPlayback(ft, script)
	s := instrument.NewSession("dmm", conn, instrument.SessionOptions{CheckErrors: true})
	if _, err := s.Identify(ctx); err != nil {
		t.Fatal(err)
	}
	if err := s.Write(ctx, "CONF:VOLT:DC 10"); err != nil {
		t.Fatal(err)
	}
	if err := conn.Close(); err != nil {
		t.Fatal(err)
	}
	ft.runCleanups()
	if len(ft.errs) != 0 {
		t.Errorf("a correct run reported: %v", ft.errs)
	}
}

func TestPlaybackReportsFaults(t *testing.T) {
	ctx := context.Background()
	tests := []struct {
		name string
		run  func(conn *pb.Playback) error
		want string
	}{
		{"unexpected command", func(c *pb.Playback) error {
			return c.Write(ctx, []byte("*RST\n"))
		}, `exchange 1 (identify): sent "*RST", script expects "*IDN?"`},
		{"unused exchanges", func(c *pb.Playback) error {
			return c.Write(ctx, []byte("*IDN?\n"))
		}, "2 of 3 exchanges not played"},
		{"read with nothing pending", func(c *pb.Playback) error {
			if err := c.Write(ctx, []byte("*IDN?\n")); err != nil {
				return err
			}
			c.ReadLine(ctx)
			if err := c.Write(ctx, []byte("CONF:VOLT:DC 10\n")); err != nil {
				return err
			}
			_, err := c.ReadLine(ctx)
			return err
		}, "read with no reply pending"},
		{"command past the end", func(c *pb.Playback) error {
			for _, e := range script {
				c.Write(ctx, []byte(e.Send+"\n"))
				c.Drain(ctx)
			}
			return c.Write(ctx, []byte("*OPC?\n"))
		}, `unexpected command "*OPC?" after the script ended`},
		{"missing terminator", func(c *pb.Playback) error {
			return c.Write(ctx, []byte("*IDN?"))
		}, "does not end with the terminator"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ft := &fakeT{TB: t}
			conn := pb.NewPlayback(ft, script)
			tc.run(conn)
			ft.runCleanups()
			if len(ft.errs) == 0 || !strings.Contains(strings.Join(ft.errs, "\n"), tc.want) {
				t.Errorf("reports %q, want one containing %q", ft.errs, tc.want)
			}
		})
	}
}

func TestPlaybackTimeoutAndDrop(t *testing.T) {
	ctx := context.Background()
	ft := &fakeT{TB: t}
	conn := pb.NewPlayback(ft, []pb.Exchange{
		{Send: "READ?", Reply: "+1.0E+00", Timeout: true},
		{Send: "*OPC?", Reply: "1"},
		{Send: "BYE", Drop: true},
	})
	conn.Write(ctx, []byte("READ?\n"))
	if _, err := conn.ReadLine(ctx); !errors.Is(err, instrument.ErrTimeout) {
		t.Errorf("silent instrument: %v, want ErrTimeout", err)
	}
	conn.Drain(ctx)
	conn.Write(ctx, []byte("*OPC?\n"))
	for _, want := range []string{"+1.0E+00", "1"} { // the late reply, then *OPC?'s
		if got, err := conn.ReadLine(ctx); err != nil || string(got) != want {
			t.Errorf("ReadLine = %q, %v; want %q", got, err, want)
		}
	}
	conn.Write(ctx, []byte("BYE\n"))
	if _, err := conn.ReadLine(ctx); !errors.Is(err, instrument.ErrClosed) {
		t.Errorf("after drop: %v, want ErrClosed", err)
	}
	ft.runCleanups()
	if len(ft.errs) != 0 {
		t.Errorf("reports %v", ft.errs)
	}
}

func TestRecorderAndScript(t *testing.T) {
	ctx := context.Background()
	ft := &fakeT{TB: t}
	rec := pb.NewRecorder(pb.NewPlayback(ft, script))
	s := instrument.NewSession("dmm", rec, instrument.SessionOptions{CheckErrors: true})
	rec.Note("identify")
	if _, err := s.Identify(ctx); err != nil {
		t.Fatal(err)
	}
	rec.Note("set range")
	if err := s.Write(ctx, "CONF:VOLT:DC 10"); err != nil {
		t.Fatal(err)
	}
	got := rec.Exchanges()
	want := append([]pb.Exchange(nil), script...)
	want[2].Comment = "" // the recorder only knows the notes it was given
	if !reflect.DeepEqual(got, want) {
		t.Errorf("recorded %+v\nwant %+v", got, want)
	}

	all := append(want, pb.Exchange{Comment: "two\nlines", Send: "DATA?", Reply: "#15a\r\nbc"},
		pb.Exchange{Send: "READ?", Timeout: true}, pb.Exchange{Send: " spaced ", Drop: true})
	var buf bytes.Buffer
	if err := pb.WriteScript(&buf, all); err != nil {
		t.Fatal(err)
	}
	back, err := pb.ParseScript(&buf)
	if err != nil || !reflect.DeepEqual(back, all) {
		t.Errorf("script round trip:\n%s\ngot  %+v\nwant %+v (%v)", buf.String(), back, all, err)
	}
	for _, bad := range []string{"< reply first\n", "? what\n", "> X\n! boom\n", ">= \"unterminated\n", "# dangling\n"} {
		if _, err := pb.ParseScript(strings.NewReader(bad)); err == nil {
			t.Errorf("ParseScript(%q) accepted", bad)
		}
	}
	ft.runCleanups()
	if len(ft.errs) != 0 {
		t.Errorf("reports %v", ft.errs)
	}
}
