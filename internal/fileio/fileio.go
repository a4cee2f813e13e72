package fileio

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
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

// tempInfix separates the destination name from the random digits in the
// name of a temporary file: "." + dest + tempInfix + digits.
const tempInfix = ".tmp"

// TempDest reports whether name (a base name) is the name WriteAtomic
// gives the temporary file of a destination: "." + dest + ".tmp" followed
// by one or more decimal digits (the random part os.CreateTemp puts in
// place of its "*"). It returns dest.
func TempDest(name string) (dest string, ok bool) {
	if !strings.HasPrefix(name, ".") {
		return "", false
	}
	i := strings.LastIndex(name, tempInfix)
	if i < 2 || i+len(tempInfix) == len(name) {
		return "", false
	}
	for _, c := range name[i+len(tempInfix):] {
		if c < '0' || c > '9' {
			return "", false
		}
	}
	return name[1:i], true
}

// RemoveTemps removes from dir the temporary files that WriteAtomic left
// behind when its process was killed, or when the machine stopped, in the
// middle of a write (a write that fails cleans up after itself; a killed
// one cannot). It removes only regular files whose names TempDest accepts
// and whose destination name ours accepts (every destination if ours is
// nil); nothing else in dir is touched, and dir itself is not searched
// recursively. It returns the names it removed, in directory order. A
// missing dir is not an error.
//
// A temporary file of a write still running in another process looks the
// same as an orphan: call RemoveTemps before the writes that are one's
// own begin, and pass ours to keep to the files that no other process
// writes (as the experiment harness does with the files of its own runs).
func RemoveTemps(dir string, ours func(dest string) bool) ([]string, error) {
	entries, err := os.ReadDir(dir)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, nil
		}
		return nil, fmt.Errorf("fileio: remove temporary files: %w", err)
	}
	var removed []string
	for _, e := range entries {
		dest, ok := TempDest(e.Name())
		if !ok || !e.Type().IsRegular() || ours != nil && !ours(dest) {
			continue
		}
		if err := os.Remove(filepath.Join(dir, e.Name())); err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				continue // removed meanwhile
			}
			return removed, fmt.Errorf("fileio: remove temporary files: %w", err)
		}
		removed = append(removed, e.Name())
	}
	return removed, nil
}

// probeName is the destination name of the probe file of CheckWritable.
const probeName = "write-check"

// CheckWritable returns nil if a file can be created in the folder dir,
// by creating an empty temporary file there (named as WriteAtomic names
// its temporary files, for a destination "write-check") and removing it.
// Programs call it before long work whose results go to dir, so that a
// folder they cannot write is found at once rather than at the end. The
// error names dir and wraps the *os.PathError (fs.ErrPermission for a
// read-only folder, fs.ErrNotExist for a missing one).
func CheckWritable(dir string) error {
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+probeName+tempInfix+"*")
	if err != nil {
		return fmt.Errorf("fileio: folder %s is not writable: %w", dir, err)
	}
	name := f.Name()
	cerr := f.Close()
	if err := os.Remove(name); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("fileio: folder %s: %w", dir, err)
	}
	if cerr != nil {
		return fmt.Errorf("fileio: folder %s is not writable: %w", dir, cerr)
	}
	return nil
}
