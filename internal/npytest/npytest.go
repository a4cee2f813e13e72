// Package npytest reads an array folder (experiment.WriteArrays) back with
// NumPy, for tests: it runs Debian's Python 3 (/usr/bin/python3) with
// numpy on every file the manifest lists and returns what NumPy found,
// float64 values as their IEEE 754 bits, so tests compare bit for bit.
//
// If numpy cannot be imported, Load skips the test, unless the environment
// variable SUCCESSOR_REQUIRE_NUMPY is set (as .ci/run does): then the test
// fails.
package npytest

import (
	"encoding/json"
	"os"
	"os/exec"
	"testing"
)

// Python is the interpreter the checks run.
const Python = "/usr/bin/python3"

// RequireEnv is the environment variable that turns a missing numpy into a
// failure.
const RequireEnv = "SUCCESSOR_REQUIRE_NUMPY"

// script loads every array of the manifest with numpy.load
// (allow_pickle=False) and prints, per array, the SHA-256 of the file, the
// dtype, the shape and the values: float64 as the decimal string of their
// uint64 bits (numpy view '<u8'), integers in decimal, booleans as
// "true"/"false", strings as they are; a structured array per field.
const script = `
import hashlib, json, os, sys
import numpy as np

def column(x):
    x = np.ascontiguousarray(x).ravel()
    k = x.dtype.kind
    if k == 'f':
        if x.dtype.str != '<f8':
            raise SystemExit('unexpected float dtype ' + x.dtype.str)
        return [str(v) for v in x.view('<u8').tolist()]
    if k in 'iu':
        return [str(v) for v in x.tolist()]
    if k == 'b':
        return ['true' if v else 'false' for v in x.tolist()]
    if k == 'U':
        return [str(v) for v in x.tolist()]
    raise SystemExit('unexpected dtype ' + x.dtype.str)

d = sys.argv[1]
with open(os.path.join(d, 'manifest.json')) as f:
    man = json.load(f)
out = {'numpy': np.__version__, 'arrays': {}}
for e in man['arrays']:
    p = os.path.join(d, e['file'])
    with open(p, 'rb') as f:
        raw = f.read()
    a = np.load(p, allow_pickle=False)
    r = {'sha256': hashlib.sha256(raw).hexdigest(), 'shape': list(a.shape)}
    if a.dtype.names is None:
        r['dtype'] = a.dtype.str
        r['values'] = column(a)
    else:
        r['dtype'] = 'structured'
        r['fields'] = [{'name': n, 'dtype': a.dtype[n].str} for n in a.dtype.names]
        r['columns'] = {n: column(a[n]) for n in a.dtype.names}
    out['arrays'][e['name']] = r
json.dump(out, sys.stdout)
`

// Field is a field of a structured array as NumPy reports it.
type Field struct {
	Name  string `json:"name"`
	DType string `json:"dtype"`
}

// Loaded is one array as NumPy read it.
type Loaded struct {
	SHA256 string  `json:"sha256"`
	Shape  []int   `json:"shape"`
	DType  string  `json:"dtype"`
	Fields []Field `json:"fields"`
	// Values are the values of a plain array in C order; Columns those of
	// each field of a structured array.
	Values  []string            `json:"values"`
	Columns map[string][]string `json:"columns"`
}

// Load reads the array folder dir with NumPy and returns its arrays by
// name and NumPy's version. It skips or fails t if numpy is missing (see
// the package doc) and fails t if Python reports an error.
func Load(t testing.TB, dir string) (map[string]Loaded, string) {
	t.Helper()
	if out, err := exec.Command(Python, "-c", "import numpy").CombinedOutput(); err != nil {
		if os.Getenv(RequireEnv) != "" {
			t.Fatalf("%s is set but %s cannot import numpy (apt-get install python3-numpy): %v\n%s", RequireEnv, Python, err, out)
		}
		t.Skipf("numpy not available to %s (set %s to make this a failure): %v", Python, RequireEnv, err)
	}
	cmd := exec.Command(Python, "-c", script, dir)
	cmd.Stderr = nil
	out, err := cmd.Output()
	if err != nil {
		msg := ""
		if ee, ok := err.(*exec.ExitError); ok {
			msg = string(ee.Stderr)
		}
		t.Fatalf("numpy check of %s: %v\n%s", dir, err, msg)
	}
	var res struct {
		NumPy  string            `json:"numpy"`
		Arrays map[string]Loaded `json:"arrays"`
	}
	if err := json.Unmarshal(out, &res); err != nil {
		t.Fatalf("numpy check output: %v", err)
	}
	return res.Arrays, res.NumPy
}
