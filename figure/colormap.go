package figure

import (
	"image/color"
	"math"
)

// viridisPoints are ten evenly spaced samples (t = 0, 1/9, ..., 1) of the
// colour map viridis (van der Walt and Smith 2015, the perceptually
// uniform sequential map designed for matplotlib 2.0, public domain (CC0)),
// as the sRGB values of viridis(10) in the R package viridisLite (Garnier
// et al.). From memory: the ten hex codes are the widely reprinted ones;
// TestViridisLightness checks the property they are used for (CIE L*
// rising evenly from dark violet to light yellow).
var viridisPoints = [10][3]uint8{
	{0x44, 0x01, 0x54}, // #440154
	{0x48, 0x28, 0x78}, // #482878
	{0x3e, 0x4a, 0x89}, // #3E4A89
	{0x31, 0x68, 0x8e}, // #31688E
	{0x26, 0x82, 0x8e}, // #26828E
	{0x1f, 0x9e, 0x89}, // #1F9E89
	{0x35, 0xb7, 0x79}, // #35B779
	{0x6d, 0xcd, 0x59}, // #6DCD59
	{0xb4, 0xde, 0x2c}, // #B4DE2C
	{0xfd, 0xe7, 0x25}, // #FDE725
}

// Viridis returns the colour at t in [0, 1] of the viridis colour map
// (dark violet at 0 through blue and green to light yellow at 1),
// interpolated linearly in sRGB between ten published samples (see
// viridisPoints). t outside [0, 1] is clamped; NaN gives the colour at 0.
// Lightness rises monotonically with t, so the map reads in grey scale
// and by readers with a colour-vision deficiency.
func Viridis(t float64) color.RGBA {
	if !(t > 0) {
		t = 0
	}
	t = math.Min(t, 1)
	x := t * float64(len(viridisPoints)-1)
	i := min(int(x), len(viridisPoints)-2)
	f := x - float64(i)
	a, b := viridisPoints[i], viridisPoints[i+1]
	mix := func(k int) uint8 {
		return uint8(math.Round(float64(a[k])*(1-f) + float64(b[k])*f))
	}
	return color.RGBA{mix(0), mix(1), mix(2), 255}
}

// lightness returns the CIE 1976 L* (0 black to 100 white) of an sRGB
// colour, D65 white (IEC 61966-2-1 for the sRGB transfer curve; CIE 15:2004
// for L*).
func lightness(c color.Color) float64 {
	r, g, b, _ := c.RGBA()
	lin := func(v uint32) float64 {
		x := float64(v) / 0xffff
		if x <= 0.04045 {
			return x / 12.92
		}
		return math.Pow((x+0.055)/1.055, 2.4)
	}
	y := 0.2126*lin(r) + 0.7152*lin(g) + 0.0722*lin(b)
	if y > 216.0/24389 {
		return 116*math.Cbrt(y) - 16
	}
	return 24389.0 / 27 * y
}

// textOn returns black or white, whichever reads better on background c.
func textOn(c color.Color) color.Color {
	if lightness(c) > 55 {
		return color.Black
	}
	return color.White
}
