// Package atomicfile writes a file so that it is either whole or absent:
// the content goes to a temporary file in the same directory, which is
// synced, given mode 0644 and renamed into place. A failure removes the
// temporary file and leaves any earlier file at the path untouched.
package atomicfile

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// Write writes data to path atomically.
func Write(path string, data []byte) error {
	return WriteFunc(path, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// WriteFunc writes what fill writes to path atomically.
func WriteFunc(path string, fill func(io.Writer) error) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	err = fill(tmp)
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp.Name(), 0o644)
	}
	if err == nil {
		err = os.Rename(tmp.Name(), path)
	}
	if err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("write %s: %w", path, err)
	}
	return nil
}
