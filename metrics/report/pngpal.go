package report

import (
	"image"
	"image/color"
	"io"

	"gonum.org/v1/plot/vg/vgimg"

	"quietband/detect"
)

// spectrogramPalette is the 256-colour palette a spectrogram picture is
// stored with (issue 18 item 8: a 0.25 s spectrogram was about 800 KB as
// 24-bit PNG): rampSteps steps of the ramp (adjacent steps differ by at most 4
// RGB units per channel, so any ramp colour is within 2 of one: below what
// the eye tells apart on a noisy heat map), the class colours, the chrome colours and greys for text
// and its anti-aliasing.
var spectrogramPalette = func() color.Palette {
	var p color.Palette
	for i := range rampSteps {
		p = append(p, blend(float64(i)/(rampSteps-1), 1))
	}
	for _, c := range detect.Classes {
		p = append(p, ClassColor(c))
	}
	p = append(p, ClassColor(""), inkColor, gridColor, quarantColor, psdColor, floorColor, skMaxColor, skMeanColor,
		color.NRGBA{0xff, 0xff, 0xff, 0xff})
	for i := 0; len(p) < 256; i++ {
		v := uint8(i * 255 / (256 - rampSteps - 17))
		p = append(p, color.NRGBA{v, v, v, 0xff})
	}
	return p
}()

// writePalettedPNG stores the canvas with spectrogramPalette: each pixel
// takes the nearest palette colour (Euclidean in RGB; nearest, no
// dithering, so flat areas stay flat), looked up once per distinct colour.
func writePalettedPNG(w io.Writer, c *vgimg.Canvas) error {
	src := c.Image()
	b := src.Bounds()
	dst := image.NewPaletted(b, spectrogramPalette)
	cache := map[uint32]uint8{}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := src.At(x, y).RGBA()
			key := r>>8<<16 | g>>8<<8 | bl>>8
			i, ok := cache[key]
			if !ok {
				i = uint8(spectrogramPalette.Index(color.RGBA64{uint16(r), uint16(g), uint16(bl), 0xffff}))
				cache[key] = i
			}
			dst.Pix[(y-b.Min.Y)*dst.Stride+(x-b.Min.X)] = i
		}
	}
	return pngEncoder.Encode(w, dst)
}

// rampSteps is the number of ramp colours in spectrogramPalette.
const rampSteps = 224
