package errs

import (
	"errors"
	"fmt"
	"testing"
)

// TestDistinct checks that the sentinels are distinct conditions: wrapping
// one matches it and none of the others.
func TestDistinct(t *testing.T) {
	all := []error{Dimension, NonFinite, Discount, Config, Diverged, Corrupt}
	for i, e := range all {
		w := fmt.Errorf("pkg: op: %w", e)
		for j, f := range all {
			if got := errors.Is(w, f); got != (i == j) {
				t.Errorf("errors.Is(wrapped %q, %q) = %v", e, f, got)
			}
		}
	}
}
