package instrument

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"syscall"
	"time"

	"go.bug.st/serial"
)

// serialPollInterval bounds each blocking read on a serial port so that a
// cancelled context is noticed within about this long: go.bug.st/serial has
// no way to interrupt a read other than closing the port.
const serialPollInterval = 50 * time.Millisecond

// serialConn is a serial line (RS-232 / USB-serial / pseudo-terminal).
type serialConn struct {
	addr  Address
	port  serial.Port
	lb    *lineBuffer
	quiet time.Duration
}

var _ Conn = (*serialConn)(nil)
var _ RawReader = (*serialConn)(nil)

func openSerial(ctx context.Context, addr Address, opts DialOptions) (Conn, error) {
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("open %s: %w", addr, err)
	}
	mode := &serial.Mode{BaudRate: addr.Baud, DataBits: addr.DataBits}
	switch addr.Parity {
	case "none", "":
		mode.Parity = serial.NoParity
	case "odd":
		mode.Parity = serial.OddParity
	case "even":
		mode.Parity = serial.EvenParity
	case "mark":
		mode.Parity = serial.MarkParity
	case "space":
		mode.Parity = serial.SpaceParity
	default:
		return nil, &AddressError{Address: addr.String(), Reason: fmt.Sprintf("parity %q", addr.Parity)}
	}
	switch addr.StopBits {
	case "1", "":
		mode.StopBits = serial.OneStopBit
	case "1.5":
		mode.StopBits = serial.OnePointFiveStopBits
	case "2":
		mode.StopBits = serial.TwoStopBits
	default:
		return nil, &AddressError{Address: addr.String(), Reason: fmt.Sprintf("stop bits %q", addr.StopBits)}
	}
	p, err := serial.Open(addr.Device, mode)
	if err != nil {
		return nil, serialOpenError(addr, err)
	}
	return &serialConn{addr: addr, port: p, lb: newLineBuffer(opts), quiet: opts.DrainQuiet}, nil
}

// serialOpenError maps go.bug.st/serial's PortError codes (and the raw
// errno it passes through on Unix) to messages a user can act on.
func serialOpenError(addr Address, err error) error {
	var pe *serial.PortError
	if errors.As(err, &pe) {
		var hint string
		switch pe.Code() {
		case serial.PortBusy:
			hint = "the port is in use by another program (a terminal, a modem manager, another nullbench); close it and retry"
		case serial.PortNotFound:
			hint = "no such port; check the device name and that the adapter is plugged in"
		case serial.PermissionDenied:
			hint = "permission denied; add your user to the group owning the device (often dialout or uucp) or fix its permissions"
		case serial.InvalidSerialPort:
			hint = "the device is not a serial port (or rejected the line settings); check the device path"
		case serial.InvalidSpeed:
			hint = fmt.Sprintf("baud rate %d is not supported by this port; use a standard rate such as 9600 or 115200", addr.Baud)
		case serial.InvalidDataBits:
			hint = fmt.Sprintf("%d data bits is not supported by this port", addr.DataBits)
		case serial.InvalidParity:
			hint = fmt.Sprintf("parity %q is not supported by this port", addr.Parity)
		case serial.InvalidStopBits:
			hint = fmt.Sprintf("%s stop bits is not supported by this port (1.5 is rare; use 1 or 2)", addr.StopBits)
		default:
			hint = "the serial driver refused the port"
		}
		return fmt.Errorf("open %s: %s: %w", addr, hint, err)
	}
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return fmt.Errorf("open %s: no such port; check the device name and that the adapter is plugged in: %w", addr, err)
	case errors.Is(err, fs.ErrPermission):
		return fmt.Errorf("open %s: permission denied; add your user to the group owning the device (often dialout) or fix its permissions: %w", addr, err)
	case errors.Is(err, syscall.ENOTTY):
		return fmt.Errorf("open %s: the device is not a serial port: %w", addr, err)
	}
	return fmt.Errorf("open %s: %w", addr, err)
}

// fill reads once. go.bug.st/serial reports a read time-out on Linux as
// (0, nil) rather than an error; here that only means "poll again", and the
// end of ctx's deadline becomes our ErrTimeout.
func (c *serialConn) fill(ctx context.Context, p []byte) (int, error) {
	what := "read " + c.addr.String()
	for {
		if ctx.Err() != nil {
			return 0, ctxError(ctx, what)
		}
		step := serialPollInterval
		if dl, ok := ctx.Deadline(); ok {
			left := time.Until(dl)
			if left <= 0 {
				return 0, ctxError(ctx, what)
			}
			step = min(step, left)
		}
		if err := c.port.SetReadTimeout(step); err != nil {
			return 0, c.mapErr(what, err)
		}
		n, err := c.port.Read(p)
		if err != nil {
			return 0, c.mapErr(what, err)
		}
		if n > 0 {
			return n, nil
		}
		// (0, nil): this poll timed out; look at ctx and go round.
	}
}

func (c *serialConn) mapErr(what string, err error) error {
	var pe *serial.PortError
	if errors.As(err, &pe) && pe.Code() == serial.PortClosed {
		return fmt.Errorf("%s: %w (%v)", what, ErrClosed, err)
	}
	if errors.Is(err, syscall.EIO) || errors.Is(err, fs.ErrClosed) {
		// EIO: the other end of a pseudo-terminal or a USB adapter went away.
		return fmt.Errorf("%s: %w (%v)", what, ErrClosed, err)
	}
	return fmt.Errorf("%s: %w", what, err)
}

// Write sends p. A serial write completes when the kernel has taken the
// bytes, so ctx is only checked before starting.
func (c *serialConn) Write(ctx context.Context, p []byte) error {
	what := "write " + c.addr.String()
	for len(p) > 0 {
		if ctx.Err() != nil {
			return ctxError(ctx, what)
		}
		n, err := c.port.Write(p)
		if err != nil {
			return c.mapErr(what, err)
		}
		if n == 0 {
			return fmt.Errorf("%s: the port accepted no bytes", what)
		}
		p = p[n:]
	}
	return nil
}

func (c *serialConn) ReadLine(ctx context.Context) ([]byte, error) {
	return c.lb.readLine(ctx, c.fill)
}

func (c *serialConn) ReadFull(ctx context.Context, p []byte) error {
	return c.lb.readFull(ctx, p, c.fill)
}

// Drain purges the driver's input buffer, then discards what arrives until
// the line is quiet.
func (c *serialConn) Drain(ctx context.Context) error {
	if err := c.port.ResetInputBuffer(); err != nil {
		return c.mapErr("drain "+c.addr.String(), err)
	}
	return c.lb.drain(ctx, c.quiet, c.fill)
}

func (c *serialConn) Close() error { return c.port.Close() }
