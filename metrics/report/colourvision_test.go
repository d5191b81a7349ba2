package report

import (
	"image/color"
	"math"
	"testing"

	"quietband/detect"
)

// machado2009 are the colour-vision-deficiency simulation matrices of
// Machado, Oliveira & Fernandes, "A Physiologically-based Model for
// Simulation of Color Vision Deficiency", IEEE TVCG 15(6), 2009, severity
// 1.0 (dichromacy), applied to linear sRGB (values from memory of the
// paper's table).
var machado2009 = map[string][3][3]float64{
	"protanopia": {
		{0.152286, 1.052583, -0.204868},
		{0.114503, 0.786281, 0.099216},
		{-0.003882, -0.048116, 1.051998}},
	"deuteranopia": {
		{0.367322, 0.860646, -0.227968},
		{0.280085, 0.672501, 0.047413},
		{-0.011820, 0.042940, 0.968881}},
	"tritanopia": {
		{1.255528, -0.076749, -0.178779},
		{-0.078411, 0.930809, 0.147602},
		{0.004733, 0.691367, 0.303900}},
	"normal vision": {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}},
}

// srgbLinear is the sRGB transfer function inverted (IEC 61966-2-1).
func srgbLinear(v uint8) float64 {
	c := float64(v) / 255
	if c <= 0.04045 {
		return c / 12.92
	}
	return math.Pow((c+0.055)/1.055, 2.4)
}

// simulatedLab is the CIELAB colour (D65 white) that a viewer with the
// deficiency m sees for c: linear sRGB through m, clipped, then XYZ (sRGB
// primaries, IEC 61966-2-1) and L*a*b* (CIE 15:2004).
func simulatedLab(c color.NRGBA, m [3][3]float64) [3]float64 {
	l := [3]float64{srgbLinear(c.R), srgbLinear(c.G), srgbLinear(c.B)}
	var s [3]float64
	for i := range 3 {
		s[i] = math.Min(math.Max(m[i][0]*l[0]+m[i][1]*l[1]+m[i][2]*l[2], 0), 1)
	}
	x := 0.4124*s[0] + 0.3576*s[1] + 0.1805*s[2]
	y := 0.2126*s[0] + 0.7152*s[1] + 0.0722*s[2]
	z := 0.0193*s[0] + 0.1192*s[1] + 0.9505*s[2]
	f := func(t float64) float64 {
		if t > 216.0/24389 {
			return math.Cbrt(t)
		}
		return (24389.0/27*t + 16) / 116
	}
	fx, fy, fz := f(x/0.95047), f(y), f(z/1.08883)
	return [3]float64{116*fy - 16, 500 * (fx - fy), 200 * (fy - fz)}
}

// TestPaletteColourVision (issue 18 item 8: cw and cn0_drop nearly the
// same colour, pulsed green beside cn0_drop red failing colour-blind
// readers): under simulated protanopia, deuteranopia and tritanopia
// (Machado et al. 2009) and normal vision, every pair of class colours is
// at least 30 ΔE*ab (CIE76) apart — about ten times the just-noticeable
// difference of 2.3 (Sharma 2003, "Digital Color Imaging Handbook") — and
// every colour has L* ≥ 50, to show on the spectrogram's dark end.
func TestPaletteColourVision(t *testing.T) {
	const minDE, minL = 30, 50
	worst := math.Inf(1)
	for name, m := range machado2009 {
		for i, a := range detect.Classes {
			la := simulatedLab(ClassColor(a), m)
			if name == "normal vision" && la[0] < minL {
				t.Errorf("%s: L* %.1f, want ≥ %d", a, la[0], minL)
			}
			for _, b := range detect.Classes[i+1:] {
				lb := simulatedLab(ClassColor(b), m)
				de := math.Sqrt((la[0]-lb[0])*(la[0]-lb[0]) + (la[1]-lb[1])*(la[1]-lb[1]) + (la[2]-lb[2])*(la[2]-lb[2]))
				worst = math.Min(worst, de)
				if de < minDE {
					t.Errorf("%s: %s and %s are %.1f ΔE apart, want ≥ %d", name, a, b, de, minDE)
				}
			}
		}
	}
	t.Logf("closest pair of class colours over the four simulations: %.1f ΔE*ab", worst)
}
