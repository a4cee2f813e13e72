package experiment

import (
	"errors"
	"testing"
)

// FuzzManifest: any input either parses into a manifest whose entries pass
// the checks again after a JSON round trip, or is refused with ErrCorrupt;
// it never panics.
func FuzzManifest(f *testing.F) {
	f.Add([]byte(`{"format":"successor-arrays","version":1,"library_version":"0","arrays":[{"name":"a","file":"a.npy","description":"","dtype":"<f8","shape":[2,3],"axes":["i","j"],"labels":{"i":["x","y"]},"sha256":"0000000000000000000000000000000000000000000000000000000000000000"}]}`))
	f.Add([]byte(`{"format":"successor-arrays","version":1,"arrays":[{"name":"r","file":"r.npy","dtype":"structured","fields":[{"name":"x","dtype":"<f8"}],"shape":[9223372036854775807],"axes":["r"],"sha256":"0000000000000000000000000000000000000000000000000000000000000000"}]}`))
	f.Add([]byte(`{}`))
	f.Add([]byte(`[`))
	f.Fuzz(func(t *testing.T, b []byte) {
		m, err := parseManifest(b)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			return
		}
		if m.Format != ManifestFormat || m.Version != ManifestVersion {
			t.Fatalf("accepted %q %d", m.Format, m.Version)
		}
		for _, a := range m.Arrays {
			if !validName(a.Name) || len(a.Axes) != len(a.Shape) {
				t.Fatalf("accepted entry %+v", a)
			}
		}
	})
}
