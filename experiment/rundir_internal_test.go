package experiment

import (
	"errors"
	"reflect"
	"testing"

	"github.com/successor-go/successor/transfer"
)

// FuzzRunRecord checks that the run-record loader rejects anything but a
// well-framed record with an error wrapping ErrCheckpoint, and that what it
// accepts round-trips.
func FuzzRunRecord(f *testing.F) {
	good, err := marshalRunRecord(&runRecord{Key: "ab12", Method: transfer.Categorical, Seed: 7, Steps: 1200, FinalMI: 1.25,
		Records: []Record{{Variant: "categorical:usf+gpi", Job: "apple", Budget: 20, Seed: 7, Normalised: -0.125, Value: 3.5, RSquared: 0.75, Rewarded: 4, Lambda: 1e-3}}})
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add(good[:len(good)/2])
	f.Add([]byte(`{"format":"x","version":1,"crc32c":0,"body":{}}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := unmarshalRunRecord(data)
		if err != nil {
			if !errors.Is(err, ErrCheckpoint) {
				t.Fatalf("error %v does not wrap ErrCheckpoint", err)
			}
			return
		}
		b, err := marshalRunRecord(r)
		if err != nil {
			t.Fatal(err)
		}
		r2, err := unmarshalRunRecord(b)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(r, r2) {
			t.Fatalf("round trip: %+v, then %+v", r, r2)
		}
	})
}
