package report

import (
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot/palette"

	"quietband/detect"
)

// rampStops are the report's spectrogram colours, from weak to strong.
// Their relative luminance Y = 0.2126 R + 0.7152 G + 0.0722 B (ITU-R
// BT.709 coefficients) rises from stop to stop, and Y is linear in R, G
// and B, so the straight-line blend between stops keeps brightness
// monotonic in power: the brightest pixel is the strongest cell.
var rampStops = []color.NRGBA{
	{0x0a, 0x0f, 0x24, 0xff}, // ink
	{0x23, 0x30, 0x6b, 0xff}, // indigo
	{0x1d, 0x7f, 0x86, 0xff}, // teal
	{0xd9, 0xa5, 0x3a, 0xff}, // amber
	{0xfb, 0xf3, 0xd0, 0xff}, // cream
}

// ramp is a palette.ColorMap that blends rampStops linearly over
// [min, max].
type ramp struct {
	min, max, alpha float64
}

var _ palette.ColorMap = (*ramp)(nil)

func newRamp(min, max float64) *ramp { return &ramp{min: min, max: max, alpha: 1} }

// At implements palette.ColorMap.
func (r *ramp) At(v float64) (color.Color, error) {
	if !(v >= r.min && v <= r.max) {
		return nil, fmt.Errorf("report: value %g outside the colour range [%g, %g]", v, r.min, r.max)
	}
	u := 0.0
	if r.max > r.min {
		u = (v - r.min) / (r.max - r.min)
	}
	return blend(u, r.alpha), nil
}

// blend is the colour at fraction u ∈ [0, 1] of the ramp.
func blend(u, alpha float64) color.NRGBA {
	u = math.Min(math.Max(u, 0), 1)
	seg := u * float64(len(rampStops)-1)
	i := min(int(seg), len(rampStops)-2)
	t := seg - float64(i)
	a, b := rampStops[i], rampStops[i+1]
	mix := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + t*(float64(y)-float64(x)))) }
	return color.NRGBA{mix(a.R, b.R), mix(a.G, b.G), mix(a.B, b.B), uint8(math.Round(255 * alpha))}
}

// Max implements palette.ColorMap.
func (r *ramp) Max() float64 { return r.max }

// SetMax implements palette.ColorMap.
func (r *ramp) SetMax(v float64) { r.max = v }

// Min implements palette.ColorMap.
func (r *ramp) Min() float64 { return r.min }

// SetMin implements palette.ColorMap.
func (r *ramp) SetMin(v float64) { r.min = v }

// Alpha implements palette.ColorMap.
func (r *ramp) Alpha() float64 { return r.alpha }

// SetAlpha implements palette.ColorMap.
func (r *ramp) SetAlpha(a float64) {
	if a < 0 || a > 1 {
		panic("report: alpha outside [0, 1]")
	}
	r.alpha = a
}

// Palette implements palette.ColorMap.
func (r *ramp) Palette(n int) palette.Palette {
	cs := make([]color.Color, n)
	for i := range cs {
		u := 0.0
		if n > 1 {
			u = float64(i) / float64(n-1)
		}
		cs[i] = blend(u, r.alpha)
	}
	return colors(cs)
}

type colors []color.Color

func (c colors) Colors() []color.Color { return c }

// ClassColor is the colour of an event class in every picture and table.
// The seven colours stand apart for the common colour-vision deficiencies
// as well as for normal vision: simulated protanopia, deuteranopia and
// tritanopia (Machado, Oliveira & Fernandes 2009, severity 1) keep every
// pair at least 30 CIELAB ΔE*ab apart (35 at the closest pair;
// TestPaletteColourVision), every colour is at least L* 50, so that it shows
// on the spectrogram's dark end, and none is within 60 RGB units of any
// ramp colour (TestPalette). Found by a search over a 17-step RGB grid
// under those constraints (issue 18: cw and cn0_drop were 13 ΔE apart
// under deuteranopia).
func ClassColor(class string) color.NRGBA {
	switch class {
	case detect.ClassCW:
		return color.NRGBA{0xdd, 0x44, 0x22, 0xff} // vermilion
	case detect.ClassSwept:
		return color.NRGBA{0xaa, 0x44, 0xff, 0xff} // violet
	case detect.ClassPulsed:
		return color.NRGBA{0x66, 0xff, 0xaa, 0xff} // mint
	case detect.ClassWidebandNoise:
		return color.NRGBA{0xee, 0xcc, 0x00, 0xff} // yellow
	case detect.ClassNarrowbandNoise:
		return color.NRGBA{0xcc, 0xee, 0xff, 0xff} // pale blue
	case detect.ClassCN0Drop:
		return color.NRGBA{0x66, 0x77, 0xbb, 0xff} // slate blue
	case detect.ClassSpoofing:
		return color.NRGBA{0xbb, 0x66, 0x77, 0xff} // dusty rose
	}
	return color.NRGBA{0xe0, 0xe0, 0xe0, 0xff}
}

// Text and chrome colours.
var (
	inkColor      = color.NRGBA{0x1d, 0x23, 0x30, 0xff}
	gridColor     = color.NRGBA{0xdd, 0xe1, 0xe8, 0xff}
	quarantColor  = color.NRGBA{0x6b, 0x6f, 0x7a, 0xff}
	psdColor      = color.NRGBA{0x1f, 0x4e, 0xa8, 0xff}
	floorColor    = color.NRGBA{0xc2, 0x5b, 0x12, 0xff}
	skMaxColor    = color.NRGBA{0x8a, 0x1c, 0x7c, 0xff}
	skMeanColor   = color.NRGBA{0x1d, 0x7f, 0x86, 0xff}
	thresholdClr  = color.NRGBA{0x6b, 0x6f, 0x7a, 0xff}
	peakColor     = color.NRGBA{0xc2, 0x5b, 0x12, 0xff}
	meanPwrColor  = color.NRGBA{0x1f, 0x4e, 0xa8, 0xff}
	excludedShade = color.NRGBA{0x9a, 0x9e, 0xa8, 0x40}
)
