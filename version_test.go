package successor

import (
	"bufio"
	"os"
	"regexp"
	"strings"
	"testing"
)

// TestVersionMatchesChangelog checks that Version is a semantic version
// (semver.org 2.0.0, without build metadata) and that it names the newest
// section of CHANGELOG.md, so a cited version always has its change list.
func TestVersionMatchesChangelog(t *testing.T) {
	semver := regexp.MustCompile(`^(0|[1-9]\d*)\.(0|[1-9]\d*)\.(0|[1-9]\d*)(-[0-9A-Za-z.-]+)?$`)
	if !semver.MatchString(Version) {
		t.Fatalf("Version %q is not a semantic version", Version)
	}
	f, err := os.Open("CHANGELOG.md")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := sc.Text()
		if !strings.HasPrefix(line, "## ") {
			continue
		}
		fields := strings.Fields(strings.TrimPrefix(line, "## "))
		if len(fields) == 0 || fields[0] != Version {
			t.Fatalf("newest CHANGELOG section is %q, Version is %q", line, Version)
		}
		return
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	t.Fatal("CHANGELOG.md has no version section")
}
