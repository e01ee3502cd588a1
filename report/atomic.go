package report

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"time"
)

// tempPrefix starts the name of every temporary file the report writes
// next to its target; RemoveStaleTemps removes those a kill left behind.
const tempPrefix = ".nullbench-"

// ErrSymlink is wrapped when an output path is an existing symbolic link:
// it is refused rather than followed (a link planted in an output folder
// would otherwise make the tool overwrite whatever it points at).
var ErrSymlink = errors.New("is a symbolic link; refusing to follow it")

// RefuseSymlink returns an error wrapping ErrSymlink when path exists and
// is a symbolic link; nil when it does not exist or is not a link.
func RefuseSymlink(path string) error {
	fi, err := os.Lstat(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil
		}
		return err
	}
	if fi.Mode()&fs.ModeSymlink != 0 {
		return fmt.Errorf("%s %w", path, ErrSymlink)
	}
	return nil
}

// WriteFileAtomic writes path through a temporary file in the same folder
// that is renamed into place once complete: a kill leaves either the old
// file or the new one, never a truncated file. An existing symbolic link
// at path is refused (ErrSymlink). The file gets the mode of the file it
// replaces, or 0644.
func WriteFileAtomic(path string, write func(io.Writer) error) (err error) {
	if err := RefuseSymlink(path); err != nil {
		return err
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), tempPrefix+"*"+filepath.Ext(path))
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	bw := bufio.NewWriter(tmp)
	if err = write(bw); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err = bw.Flush(); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	mode := os.FileMode(0o644)
	if fi, serr := os.Stat(path); serr == nil {
		mode = fi.Mode().Perm()
	}
	if err = tmp.Chmod(mode); err != nil {
		return err
	}
	if err = tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}

// staleAfter is how old a temporary file must be before RemoveStaleTemps
// takes it for a kill's leftover rather than another writer's work.
const staleAfter = time.Minute

// RemoveStaleTemps removes the temporary files (".nullbench-*") in dir
// that a killed write left behind, and returns how many it removed.
func RemoveStaleTemps(dir string) (int, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return 0, nil
		}
		return 0, err
	}
	n := 0
	var errs []error
	for _, e := range ents {
		if !strings.HasPrefix(e.Name(), tempPrefix) || !e.Type().IsRegular() {
			continue
		}
		fi, err := e.Info()
		if err != nil || time.Since(fi.ModTime()) < staleAfter {
			continue
		}
		if err := os.Remove(filepath.Join(dir, e.Name())); err != nil {
			errs = append(errs, err)
			continue
		}
		n++
	}
	return n, errors.Join(errs...)
}
