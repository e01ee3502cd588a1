package instrument_test

import (
	"bufio"
	"context"
	"net"
	"testing"

	"nullbench/instrument"
)

// opcServer answers every line with "1\n" (as an instrument answers
// *OPC?), on loopback.
func opcServer(b *testing.B) net.Addr {
	b.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		b.Fatal(err)
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		c, err := ln.Accept()
		if err != nil {
			return
		}
		defer c.Close()
		r := bufio.NewReader(c)
		w := bufio.NewWriter(c)
		for {
			if _, err := r.ReadSlice('\n'); err != nil {
				return
			}
			w.WriteString("1\n")
			if err := w.Flush(); err != nil {
				return
			}
		}
	}()
	b.Cleanup(func() { ln.Close(); <-done })
	return ln.Addr()
}

// BenchmarkSessionQuery is one *OPC? round trip through Session and the
// TCP transport (time-out context, deadline, line splitting).
func BenchmarkSessionQuery(b *testing.B) {
	la := opcServer(b)
	addr, _ := instrument.ParseAddress("tcp://" + la.String())
	c, err := instrument.Dial(context.Background(), addr, instrument.DialOptions{})
	if err != nil {
		b.Fatal(err)
	}
	s := instrument.NewSession("bench", c, instrument.SessionOptions{})
	defer s.Close()
	ctx := context.Background()
	for b.Loop() {
		if r, err := s.Query(ctx, "*OPC?"); err != nil || r != "1" {
			b.Fatalf("%q %v", r, err)
		}
	}
}

// BenchmarkBareSocketEcho is the same round trip on a bare net.Conn with a
// bufio reader, for the overhead of the layers above.
func BenchmarkBareSocketEcho(b *testing.B) {
	la := opcServer(b)
	c, err := net.Dial("tcp", la.String())
	if err != nil {
		b.Fatal(err)
	}
	defer c.Close()
	r := bufio.NewReader(c)
	msg := []byte("*OPC?\n")
	for b.Loop() {
		if _, err := c.Write(msg); err != nil {
			b.Fatal(err)
		}
		line, err := r.ReadSlice('\n')
		if err != nil || string(line) != "1\n" {
			b.Fatalf("%q %v", line, err)
		}
	}
}
