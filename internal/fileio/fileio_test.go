package fileio

import (
	"bytes"
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// entries returns the names in dir, sorted.
func entries(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

func TestWriteAtomicRoundTrip(t *testing.T) {
	t.Parallel()
	big := bytes.Repeat([]byte("0123456789abcdef"), 1<<12) // 64 KiB, larger than the bufio buffer
	for _, tc := range []struct {
		name string
		data []byte
	}{
		{"empty", nil},
		{"short", []byte("successor\n")},
		{"binary", []byte{0, 1, 2, 0xff, 0xfe, '\n', 0}},
		{"large", big},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "out.bin")
			if err := WriteAtomic(path, tc.data, 0o644); err != nil {
				t.Fatalf("WriteAtomic: %v", err)
			}
			got, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(got, tc.data) {
				t.Errorf("read back %d bytes, want %d identical bytes", len(got), len(tc.data))
			}
			if names := entries(t, dir); len(names) != 1 || names[0] != "out.bin" {
				t.Errorf("directory holds %q, want only out.bin", names)
			}
		})
	}
}

func TestWriteAtomicReplaces(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := filepath.Join(dir, "state")
	for _, s := range []string{"first version, long", "second"} {
		if err := WriteAtomic(path, []byte(s), 0o600); err != nil {
			t.Fatal(err)
		}
		got, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		if string(got) != s {
			t.Errorf("after writing %q read %q", s, got)
		}
	}
	if names := entries(t, dir); len(names) != 1 {
		t.Errorf("directory holds %q, want only state", names)
	}
}

func TestWriteAtomicFuncStreams(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "lines.txt")
	err := WriteAtomicFunc(path, 0o644, func(w io.Writer) error {
		for i := range 3 {
			if _, err := io.WriteString(w, strings.Repeat("x", i+1)+"\n"); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if want := "x\nxx\nxxx\n"; string(got) != want {
		t.Errorf("read %q, want %q", got, want)
	}
}

// TestWriteAtomicFuncFailure checks that a failing write function leaves no
// temporary file, leaves an existing file untouched (or no file if there was
// none) and returns the function's error unchanged.
func TestWriteAtomicFuncFailure(t *testing.T) {
	t.Parallel()
	errBoom := errors.New("boom")
	for _, tc := range []struct {
		name     string
		existing []byte // nil: no file before the write
		partial  int    // bytes written before the failure
	}{
		{"no file, nothing written", nil, 0},
		{"no file, partial write", nil, 100},
		{"existing file, nothing written", []byte("old contents\n"), 0},
		{"existing file, partial write", []byte("old contents\n"), 100},
		{"existing file, partial write beyond buffer", []byte("old contents\n"), 10000},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "keep.dat")
			if tc.existing != nil {
				if err := os.WriteFile(path, tc.existing, 0o644); err != nil {
					t.Fatal(err)
				}
			}
			err := WriteAtomicFunc(path, 0o644, func(w io.Writer) error {
				if _, err := w.Write(bytes.Repeat([]byte{'n'}, tc.partial)); err != nil {
					return err
				}
				return errBoom
			})
			if err != errBoom {
				t.Fatalf("error %v, want the write function's error unchanged", err)
			}
			got, rerr := os.ReadFile(path)
			switch {
			case tc.existing == nil && !errors.Is(rerr, fs.ErrNotExist):
				t.Errorf("file exists after a failed first write (read error %v)", rerr)
			case tc.existing != nil && rerr != nil:
				t.Errorf("existing file lost: %v", rerr)
			case tc.existing != nil && !bytes.Equal(got, tc.existing):
				t.Errorf("existing file changed to %q", got)
			}
			var want []string
			if tc.existing != nil {
				want = []string{"keep.dat"}
			}
			if names := entries(t, dir); len(names) != len(want) || (len(want) == 1 && names[0] != want[0]) {
				t.Errorf("directory holds %q, want %q (temporary file left behind?)", names, want)
			}
		})
	}
}

func TestWriteAtomicMissingDir(t *testing.T) {
	t.Parallel()
	path := filepath.Join(t.TempDir(), "no", "such", "dir", "f")
	err := WriteAtomic(path, []byte("x"), 0o644)
	if !errors.Is(err, fs.ErrNotExist) {
		t.Fatalf("error %v, want one wrapping fs.ErrNotExist", err)
	}
	if !strings.Contains(err.Error(), path) {
		t.Errorf("error %q does not name the path %q", err, path)
	}
}

func TestWriteAtomicRenameOntoDir(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	path := filepath.Join(dir, "sub")
	if err := os.Mkdir(path, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(path, "inner"), []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	err := WriteAtomic(path, []byte("data"), 0o644)
	if err == nil {
		t.Fatal("renaming over a non-empty directory succeeded")
	}
	if !strings.Contains(err.Error(), path) {
		t.Errorf("error %q does not name the path %q", err, path)
	}
	if names := entries(t, dir); len(names) != 1 || names[0] != "sub" {
		t.Errorf("directory holds %q, want only sub (temporary file left behind?)", names)
	}
}

func TestWriteAtomicPerm(t *testing.T) {
	if runtime.GOOS == "windows" || runtime.GOOS == "plan9" {
		t.Skip("permission bits are not Unix bits on " + runtime.GOOS)
	}
	t.Parallel()
	dir := t.TempDir()
	for _, perm := range []os.FileMode{0o600, 0o640, 0o644, 0o400} {
		path := filepath.Join(dir, perm.String())
		if err := WriteAtomic(path, []byte("p"), perm); err != nil {
			t.Fatal(err)
		}
		fi, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		if got := fi.Mode().Perm(); got != perm {
			t.Errorf("mode %v, want %v", got, perm)
		}
	}
	// Replacing a file gives the new file perm, not the old file's bits.
	path := filepath.Join(dir, "replace")
	if err := WriteAtomic(path, []byte("a"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := WriteAtomic(path, []byte("b"), 0o644); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	if got := fi.Mode().Perm(); got != 0o644 {
		t.Errorf("replaced file: mode %v, want -rw-r--r--", got)
	}
}

func TestWriteAtomicRelativePath(t *testing.T) {
	dir := t.TempDir()
	t.Chdir(dir)
	if err := WriteAtomic("plain", []byte("rel"), 0o644); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(filepath.Join(dir, "plain"))
	if err != nil || string(got) != "rel" {
		t.Errorf("read %q, %v; want \"rel\"", got, err)
	}
}
