package figure

import (
	"image/color"
	"math"
	"testing"
)

// TestViridisLightness checks the properties the colour map is chosen for
// (van der Walt and Smith 2015): CIE L* (lightness) rises strictly from
// the darkest to the lightest end, in nearly even steps between the
// published samples, over most of the lightness range, so the map reads
// in grey scale; and the ends are the published samples.
func TestViridisLightness(t *testing.T) {
	var ls []float64
	for _, p := range viridisPoints {
		ls = append(ls, lightness(color.RGBA{p[0], p[1], p[2], 255}))
	}
	var mean float64
	for i := 1; i < len(ls); i++ {
		mean += (ls[i] - ls[i-1]) / float64(len(ls)-1)
	}
	for i := 1; i < len(ls); i++ {
		step := ls[i] - ls[i-1]
		// Tolerance: a step within 20% of the mean step (a uniform map has
		// equal steps; a rainbow map fails this by far).
		if step <= 0 || math.Abs(step-mean) > 0.2*mean {
			t.Errorf("L* step %d: %.2f, mean %.2f (L* %v)", i, step, mean, ls)
		}
	}
	if ls[0] > 25 || ls[len(ls)-1] < 85 {
		t.Errorf("L* range %.1f..%.1f, want dark to light", ls[0], ls[len(ls)-1])
	}
	prev := -1.0
	for i := range 257 {
		l := lightness(Viridis(float64(i) / 256))
		if l < prev-0.3 { // rounding to 8 bits may wobble by a fraction
			t.Errorf("L* falls at t=%v: %.2f after %.2f", float64(i)/256, l, prev)
		}
		prev = l
	}
	if Viridis(0) != (color.RGBA{0x44, 0x01, 0x54, 255}) || Viridis(1) != (color.RGBA{0xfd, 0xe7, 0x25, 255}) || Viridis(math.NaN()) != Viridis(0) || Viridis(2) != Viridis(1) {
		t.Error("ends or clamping wrong")
	}
	// Text colour: white on the dark end, black on the light end.
	if textOn(Viridis(0)) != color.White || textOn(Viridis(1)) != color.Black {
		t.Error("label colour does not contrast")
	}
	t.Logf("L* of the samples: %.1f", ls)
}

// TestLightness checks the L* formula at points given by CIE 15:2004:
// black 0, white 100, and mid-grey sRGB 119 near L* 50 (derived by hand:
// (119/255+0.055)/1.055)^2.4 = 0.1845, 116 * 0.1845^(1/3) - 16 = 50.0).
func TestLightness(t *testing.T) {
	for _, tc := range []struct {
		c    color.Color
		want float64
	}{
		{color.Black, 0}, {color.White, 100}, {color.Gray{119}, 50.0},
	} {
		if got := lightness(tc.c); math.Abs(got-tc.want) > 0.1 {
			t.Errorf("L*(%v) = %.3f, want %.1f", tc.c, got, tc.want)
		}
	}
}
