package fileio

import (
	"errors"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"testing"
	"time"
)

func TestTempDest(t *testing.T) {
	for _, tc := range []struct {
		name, dest string
		ok         bool
	}{
		{".vmf-seed1.ckpt.tmp123456", "vmf-seed1.ckpt", true},
		{".a.tmp0", "a", true},
		{".x.tmp5.tmp42", "x.tmp5", true},
		{"vmf-seed1.ckpt", "", false},
		{"vmf-seed1.ckpt.tmp123", "", false}, // not hidden
		{".a.tmp", "", false},                // no digits
		{".a.tmp12x", "", false},
		{".tmp123", "", false}, // no destination
		{".a.TMP1", "", false},
		{".hidden", "", false},
	} {
		dest, ok := TempDest(tc.name)
		if dest != tc.dest || ok != tc.ok {
			t.Errorf("TempDest(%q) = %q, %v; want %q, %v", tc.name, dest, ok, tc.dest, tc.ok)
		}
	}
	// The names WriteAtomic really makes are recognised.
	dir := t.TempDir()
	f, err := os.CreateTemp(dir, ".results.json.tmp*") // the call of WriteAtomicFunc
	if err != nil {
		t.Fatal(err)
	}
	f.Close()
	if dest, ok := TempDest(filepath.Base(f.Name())); !ok || dest != "results.json" {
		t.Errorf("TempDest(%q) = %q, %v", filepath.Base(f.Name()), dest, ok)
	}
}

// killedWriterEnv makes the test binary, run as a child, start a write
// into the folder it names and block in it until killed.
const killedWriterEnv = "SUCCESSOR_FILEIO_KILLED_WRITER"

func TestMain(m *testing.M) {
	if dir := os.Getenv(killedWriterEnv); dir != "" {
		WriteAtomicFunc(filepath.Join(dir, "state.ckpt"), FileMode, func(w io.Writer) error {
			w.Write(make([]byte, 1<<16)) // more than the buffer: reaches the file
			select {}                    // block until killed
		})
		os.Exit(2)
	}
	os.Exit(m.Run())
}

// TestRemoveTempsAfterKill kills a process in the middle of WriteAtomic
// (SIGKILL, so nothing of it cleans up), checks that it left its
// temporary file, and that RemoveTemps removes that file and nothing else.
func TestRemoveTempsAfterKill(t *testing.T) {
	dir := t.TempDir()
	others := []string{"state.ckpt", ".hidden", "state.ckpt.tmp1", ".state.ckpt.tmp", ".state.ckpt.tmpx1", "notes.txt"}
	for _, n := range others {
		if err := os.WriteFile(filepath.Join(dir, n), []byte("keep"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.Mkdir(filepath.Join(dir, ".sub.tmp7"), 0o755); err != nil { // a folder with a temporary name
		t.Fatal(err)
	}
	if err := os.Symlink("notes.txt", filepath.Join(dir, ".link.tmp8")); err != nil {
		t.Fatal(err)
	}

	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), killedWriterEnv+"="+dir)
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	var orphan string
	for deadline := time.Now().Add(20 * time.Second); orphan == "" && time.Now().Before(deadline); {
		es, _ := os.ReadDir(dir)
		for _, e := range es {
			if fi, err := e.Info(); err == nil && e.Type().IsRegular() && fi.Size() >= 1<<16 {
				if d, ok := TempDest(e.Name()); ok && d == "state.ckpt" {
					orphan = e.Name()
				}
			}
		}
		time.Sleep(10 * time.Millisecond)
	}
	cmd.Process.Kill()
	cmd.Wait()
	if orphan == "" {
		t.Fatal("the killed writer left no temporary file")
	}

	// Another destination's name is not ours: kept.
	removed, err := RemoveTemps(dir, func(dest string) bool { return dest == "other" })
	if err != nil || len(removed) != 0 {
		t.Fatalf("RemoveTemps for another destination: removed %q, %v", removed, err)
	}
	removed, err = RemoveTemps(dir, func(dest string) bool { return dest == "state.ckpt" })
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(removed, []string{orphan}) {
		t.Errorf("removed %q, want [%q]", removed, orphan)
	}
	for _, n := range append(others, ".sub.tmp7", ".link.tmp8") {
		if _, err := os.Lstat(filepath.Join(dir, n)); err != nil {
			t.Errorf("%s: %v (RemoveTemps touched it)", n, err)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, orphan)); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("orphan still there: %v", err)
	}
	// nil accepts every destination; a missing folder is no error.
	os.WriteFile(filepath.Join(dir, ".a.tmp1"), nil, 0o644)
	if removed, err := RemoveTemps(dir, nil); err != nil || !slices.Equal(removed, []string{".a.tmp1"}) {
		t.Errorf("RemoveTemps(nil): removed %q, %v", removed, err)
	}
	if removed, err := RemoveTemps(filepath.Join(dir, "missing"), nil); err != nil || removed != nil {
		t.Errorf("missing folder: %q, %v", removed, err)
	}
}

func TestCheckWritable(t *testing.T) {
	dir := t.TempDir()
	if err := CheckWritable(dir); err != nil {
		t.Fatalf("writable folder: %v", err)
	}
	if es, _ := os.ReadDir(dir); len(es) != 0 {
		t.Errorf("probe left %d entries", len(es))
	}
	if err := CheckWritable(filepath.Join(dir, "missing")); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("missing folder: %v, want fs.ErrNotExist", err)
	}
	file := filepath.Join(dir, "file")
	os.WriteFile(file, nil, 0o644)
	if err := CheckWritable(file); err == nil {
		t.Error("a regular file accepted as a folder")
	}
	ro := filepath.Join(dir, "ro")
	if err := os.Mkdir(ro, 0o555); err != nil {
		t.Fatal(err)
	}
	defer os.Chmod(ro, 0o755)
	if f, err := os.CreateTemp(ro, "x"); err == nil {
		f.Close()
		os.Remove(f.Name())
		t.Skip("a read-only folder is writable here (running as root): its case cannot be checked")
	}
	if err := CheckWritable(ro); !errors.Is(err, fs.ErrPermission) {
		t.Errorf("read-only folder: %v, want fs.ErrPermission", err)
	}
}
