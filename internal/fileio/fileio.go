package fileio

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// WriteAtomic writes data to path atomically with permission bits perm, as
// described in the package documentation. It is WriteAtomicFunc with a
// function that writes data.
func WriteAtomic(path string, data []byte, perm os.FileMode) error {
	return WriteAtomicFunc(path, perm, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// WriteAtomicFunc writes path atomically with the bytes that write writes to
// the io.Writer it is given (a buffered writer on a temporary file in the
// directory of path). The file gets exactly the permission bits of perm
// (set with chmod, so the process umask does not apply).
//
// If write returns an error, WriteAtomicFunc removes the temporary file and
// returns that error unchanged, so callers keep their own messages and
// sentinels. Its own errors (creating, flushing, syncing, closing or
// renaming the file) wrap the underlying *os.PathError or *os.LinkError and
// name path: "fileio: write PATH: ...". In every error case the temporary
// file is removed and an existing file at path is left as it was. A failure
// to sync the directory after the rename is not reported, since not every
// platform can sync a directory.
func WriteAtomicFunc(path string, perm os.FileMode, write func(io.Writer) error) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp*")
	if err != nil {
		return fmt.Errorf("fileio: write %s: %w", path, err)
	}
	tmp := f.Name()
	closed := false
	defer func() {
		if err != nil {
			if !closed {
				f.Close()
			}
			os.Remove(tmp)
		}
	}()
	wrap := func(err error) error { return fmt.Errorf("fileio: write %s: %w", path, err) }

	bw := bufio.NewWriter(f)
	if err = write(bw); err != nil {
		return err
	}
	if err = bw.Flush(); err != nil {
		return wrap(err)
	}
	if err = f.Chmod(perm); err != nil {
		return wrap(err)
	}
	if err = f.Sync(); err != nil {
		return wrap(err)
	}
	closed = true
	if err = f.Close(); err != nil {
		return wrap(err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return wrap(err)
	}
	if d, derr := os.Open(dir); derr == nil {
		d.Sync() // best effort: persist the rename
		d.Close()
	}
	return nil
}
