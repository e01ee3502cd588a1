//go:build linux

package sim

import (
	"os"
	"syscall"
	"unsafe"

	"github.com/creack/pty"
)

// ptyServer serves one instrument on a pseudo-terminal: the bench reads and
// writes the master side; the tool opens the slave path (/dev/pts/N) as a
// serial port. The slave is put in raw mode (no echo, no CR/LF translation,
// no line editing) so bytes pass as they would on a real serial line. The
// bench keeps the slave open too, so the master does not see a hang-up
// between client sessions.
type ptyServer struct {
	in     *instrument
	master *os.File
	slave  *os.File
	path   string
}

func openPTY() (*ptyServer, error) {
	master, slave, err := pty.Open()
	if err != nil {
		return nil, err
	}
	if err := makeRaw(slave); err != nil {
		_ = master.Close()
		_ = slave.Close()
		return nil, err
	}
	return &ptyServer{master: master, slave: slave, path: slave.Name()}, nil
}

// makeRaw applies the cfmakeraw(3) settings with TCGETS/TCSETS.
func makeRaw(f *os.File) error {
	sc, err := f.SyscallConn()
	if err != nil {
		return err
	}
	var opErr error
	err = sc.Control(func(fd uintptr) {
		var t syscall.Termios
		if _, _, e := syscall.Syscall(syscall.SYS_IOCTL, fd, syscall.TCGETS, uintptr(unsafe.Pointer(&t))); e != 0 {
			opErr = e
			return
		}
		t.Iflag &^= syscall.IGNBRK | syscall.BRKINT | syscall.PARMRK | syscall.ISTRIP | syscall.INLCR | syscall.IGNCR | syscall.ICRNL | syscall.IXON
		t.Oflag &^= syscall.OPOST
		t.Lflag &^= syscall.ECHO | syscall.ECHONL | syscall.ICANON | syscall.ISIG | syscall.IEXTEN
		t.Cflag &^= syscall.CSIZE | syscall.PARENB
		t.Cflag |= syscall.CS8
		t.Cc[syscall.VMIN] = 1
		t.Cc[syscall.VTIME] = 0
		if _, _, e := syscall.Syscall(syscall.SYS_IOCTL, fd, syscall.TCSETS, uintptr(unsafe.Pointer(&t))); e != 0 {
			opErr = e
		}
	})
	if err != nil {
		return err
	}
	return opErr
}

func (p *ptyServer) close() {
	_ = p.master.Close()
	_ = p.slave.Close()
}
