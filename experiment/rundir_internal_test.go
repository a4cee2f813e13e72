package experiment

import (
	"encoding/json"
	"errors"
	"hash/crc32"
	"math"
	"reflect"
	"testing"

	"github.com/successor-go/successor/transfer"
)

// FuzzRunRecord checks that the run-record loader rejects anything but a
// well-framed record with an error wrapping ErrCheckpoint, and that what it
// accepts round-trips.
func FuzzRunRecord(f *testing.F) {
	m := transfer.Categorical
	good, err := marshalRunRecord(&runRecord{Key: "ab12", Method: &m, Seed: 7, Steps: 1200, FinalMI: 1.25, Seconds: 2.5, Origin: origin(),
		Records: []Record{{Variant: "categorical:usf+gpi", Job: "apple", Budget: 20, Seed: 7, Normalised: -0.125, Value: 3.5, RSquared: 0.75, Rewarded: 4, Lambda: 1e-3}}})
	if err != nil {
		f.Fatal(err)
	}
	base, err := marshalRunRecord(&runRecord{Key: "cd34", Baselines: true, Seed: 7,
		Records: []Record{{Variant: VariantQLearning, Job: "apple", Budget: 20, Seed: 7, Normalised: 0.5, Value: 1}}})
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add(good[:len(good)/2])
	f.Add(base)
	f.Add(version1Record())
	f.Add([]byte(`{"format":"x","version":1,"crc32c":0,"body":{}}`))
	huge, err := marshalRunRecord(&runRecord{Key: "ef56", Method: &m, Seed: 7, Steps: math.MaxInt, Records: []Record{{Variant: "v", Budget: math.MaxInt}}})
	if err != nil {
		f.Fatal(err)
	}
	f.Add(huge)
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

// version1Record returns a record in the format of version 1 (before the
// baselines had records and before seconds and origin), framed as that
// version framed it.
func version1Record() []byte {
	body := []byte(`{"key":"k1","method":"given","seed":3,"steps":500,"final_mi":0,"records":[{"variant":"given:usf+gpi","job":"apple","budget":20,"seed":3,"normalised":0.25,"value":1.5,"r_squared":1,"residual":0,"rewarded":2,"lambda":0.001}]}`)
	b, err := json.Marshal(runEnvelope{Format: runFormat, Version: 1, CRC: crc32.Checksum(body, crcTable), Body: body})
	if err != nil {
		panic(err)
	}
	return b
}

// TestRunRecordVersion1 checks that records of the previous format version
// are still read, with their rows intact.
func TestRunRecordVersion1(t *testing.T) {
	r, err := unmarshalRunRecord(version1Record())
	if err != nil {
		t.Fatal(err)
	}
	if r.Method == nil || *r.Method != transfer.Given || r.Baselines || r.Seed != 3 || r.Steps != 500 || r.Seconds != 0 || r.Origin != "" {
		t.Errorf("read %+v", r)
	}
	want := []Record{{Variant: "given:usf+gpi", Job: "apple", Budget: 20, Seed: 3, Normalised: 0.25, Value: 1.5, RSquared: 1, Rewarded: 2, Lambda: 0.001}}
	if !reflect.DeepEqual(r.Records, want) {
		t.Errorf("rows %+v, want %+v", r.Records, want)
	}
	// Neither a method's record nor the baselines': refused.
	body := []byte(`{"key":"k1","seed":3,"steps":0,"final_mi":0,"records":null}`)
	b, _ := json.Marshal(runEnvelope{Format: runFormat, Version: runVersion, CRC: crc32.Checksum(body, crcTable), Body: body})
	if _, err := unmarshalRunRecord(b); !errors.Is(err, ErrCheckpoint) {
		t.Errorf("record of no run: %v, want ErrCheckpoint", err)
	}
}
