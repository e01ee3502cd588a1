package instrument

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net"
	"strconv"
	"syscall"
	"time"
)

// tcpConn is a raw SCPI socket (LXI "scpi-raw"): program messages go out
// as written, response messages end with the terminator byte.
type tcpConn struct {
	addr  Address
	nc    net.Conn
	lb    *lineBuffer
	quiet time.Duration
}

var _ Conn = (*tcpConn)(nil)
var _ RawReader = (*tcpConn)(nil)

// aLongTimeAgo is a deadline in the past: setting it interrupts a blocked
// read or write at once.
var aLongTimeAgo = time.Unix(1, 0)

func dialTCP(ctx context.Context, addr Address, opts DialOptions) (Conn, error) {
	if _, ok := ctx.Deadline(); !ok {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, opts.ConnectTimeout)
		defer cancel()
	}
	var d net.Dialer
	nc, err := d.DialContext(ctx, "tcp", net.JoinHostPort(addr.Host, strconv.Itoa(addr.Port)))
	if err != nil {
		return nil, dialError(ctx, addr, err)
	}
	return &tcpConn{addr: addr, nc: nc, lb: newLineBuffer(opts), quiet: opts.DrainQuiet}, nil
}

// dialError says what a user can check for the common ways a connect fails.
func dialError(ctx context.Context, addr Address, err error) error {
	var dnsErr *net.DNSError
	var ne net.Error
	switch {
	case errors.Is(err, syscall.ECONNREFUSED):
		return fmt.Errorf("connect %s: refused: nothing listens on port %d of %s; check the instrument is on and its raw SCPI socket is enabled (LXI default port %d): %w",
			addr, addr.Port, addr.Host, DefaultTCPPort, err)
	case errors.As(err, &dnsErr):
		return fmt.Errorf("connect %s: cannot resolve host %q; check the address in the plan: %w", addr, addr.Host, err)
	case errors.Is(err, context.Canceled):
		return fmt.Errorf("connect %s: %w", addr, err)
	case errors.As(err, &ne) && ne.Timeout(), errors.Is(err, context.DeadlineExceeded):
		return fmt.Errorf("connect %s: no answer (%w); check the host address, cable and network", addr, ErrTimeout)
	}
	return fmt.Errorf("connect %s: %w", addr, err)
}

// fill reads once, bounded by ctx's deadline and interrupted by its
// cancellation (a deadline in the past wakes the blocked read).
func (c *tcpConn) fill(ctx context.Context, p []byte) (int, error) {
	if ctx.Err() != nil {
		return 0, ctxError(ctx, "read "+c.addr.String())
	}
	dl, _ := ctx.Deadline()
	if err := c.nc.SetReadDeadline(dl); err != nil {
		return 0, c.mapErr(ctx, "read", err)
	}
	done := make(chan struct{})
	stop := context.AfterFunc(ctx, func() {
		_ = c.nc.SetReadDeadline(aLongTimeAgo)
		close(done)
	})
	n, err := c.nc.Read(p)
	if !stop() {
		<-done // the interrupt ran; let it finish before the next deadline is set
	}
	if n > 0 {
		return n, nil
	}
	return 0, c.mapErr(ctx, "read", err)
}

func (c *tcpConn) mapErr(ctx context.Context, op string, err error) error {
	var ne net.Error
	switch {
	case errors.As(err, &ne) && ne.Timeout():
		return ctxError(ctx, op+" "+c.addr.String())
	case errors.Is(err, io.EOF), errors.Is(err, net.ErrClosed),
		errors.Is(err, syscall.ECONNRESET), errors.Is(err, syscall.EPIPE):
		return fmt.Errorf("%s %s: %w (%v)", op, c.addr, ErrClosed, err)
	}
	return fmt.Errorf("%s %s: %w", op, c.addr, err)
}

func (c *tcpConn) Write(ctx context.Context, p []byte) error {
	if ctx.Err() != nil {
		return ctxError(ctx, "write "+c.addr.String())
	}
	dl, _ := ctx.Deadline()
	if err := c.nc.SetWriteDeadline(dl); err != nil {
		return c.mapErr(ctx, "write", err)
	}
	done := make(chan struct{})
	stop := context.AfterFunc(ctx, func() {
		_ = c.nc.SetWriteDeadline(aLongTimeAgo)
		close(done)
	})
	_, err := c.nc.Write(p)
	if !stop() {
		<-done
	}
	if err != nil {
		return c.mapErr(ctx, "write", err)
	}
	return nil
}

func (c *tcpConn) ReadLine(ctx context.Context) ([]byte, error) {
	return c.lb.readLine(ctx, c.fill)
}

func (c *tcpConn) ReadFull(ctx context.Context, p []byte) error {
	return c.lb.readFull(ctx, p, c.fill)
}

func (c *tcpConn) Drain(ctx context.Context) error {
	return c.lb.drain(ctx, c.quiet, c.fill)
}

func (c *tcpConn) Close() error { return c.nc.Close() }
