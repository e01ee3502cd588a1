//go:build !linux

package sim

import (
	"errors"
	"os"
)

type ptyServer struct {
	in     *instrument
	master *os.File
	path   string
}

func openPTY() (*ptyServer, error) {
	return nil, errors.New("serving an instrument on a pseudo-terminal is implemented for Linux only")
}

func (p *ptyServer) close() {}
