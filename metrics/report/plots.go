package report

import (
	"fmt"
	"image"
	"image/color"
	"image/png"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"quietband/detect"
)

// Picture sizes in pixels (width × height). They are fixed so that the
// page lays out the same whatever the data.
const (
	SpectrogramWidth, SpectrogramHeight = 1000, 720
	PSDWidth, PSDHeight                 = 1000, 380
	SKWidth, SKHeight                   = 1000, 380
	EnvelopeWidth, EnvelopeHeight       = 1000, 340
	TimelineWidth, TimelineHeight       = 1000, 880
)

// MinBoxPixels is the smallest width or height of an event box on the
// spectrogram: a narrower box (a CW tone is a few hundred hertz wide) is
// widened symmetrically about its centre to this many pixels.
const MinBoxPixels = 6

// dpi is the resolution the pictures are drawn at: a length of l points
// is l·dpi/72 pixels.
const dpi = 96

// Layout says where a picture's data area lies, so that a value can be
// found in the image. With pixel coordinates from the top-left corner,
// a value x lies in column
//
//	Left + (x − XLeft)/(XRight − XLeft)·(Right − Left)
//
// and a value y in row Top + (y − YTop)/(YBottom − YTop)·(Bottom − Top)
// (on log10 y when YLog).
type Layout struct {
	// File is the picture's file name, beside the page.
	File string `json:"file"`
	// Width and Height are the image size in pixels.
	Width  int `json:"width"`
	Height int `json:"height"`
	// Left, Top, Right and Bottom are the data area's edges in pixels
	// from the image's top-left corner.
	Left   float64 `json:"left"`
	Top    float64 `json:"top"`
	Right  float64 `json:"right"`
	Bottom float64 `json:"bottom"`
	// XLeft, XRight, YTop and YBottom are the values at those edges, in
	// XUnit and YUnit; YLog says y is on a log10 scale.
	XLeft   float64 `json:"x_left"`
	XRight  float64 `json:"x_right"`
	YTop    float64 `json:"y_top"`
	YBottom float64 `json:"y_bottom"`
	XUnit   string  `json:"x_unit"`
	YUnit   string  `json:"y_unit"`
	YLog    bool    `json:"y_log,omitempty"`
	// ColorMinDBFS and ColorMaxDBFS are the ends of a spectrogram's
	// colour scale, BoxesDrawn its number of event boxes.
	ColorMinDBFS float64 `json:"color_min_dbfs,omitempty"`
	ColorMaxDBFS float64 `json:"color_max_dbfs,omitempty"`
	BoxesDrawn   int     `json:"boxes,omitempty"`
	// PointsSkipped counts trace points left out for want of usable bins.
	PointsSkipped int `json:"points_skipped,omitempty"`
}

// XPixel is the pixel column of value x.
func (l Layout) XPixel(x float64) float64 {
	return l.Left + (x-l.XLeft)/(l.XRight-l.XLeft)*(l.Right-l.Left)
}

// YPixel is the pixel row of value y.
func (l Layout) YPixel(y float64) float64 {
	top, bot := l.YTop, l.YBottom
	if l.YLog {
		y, top, bot = math.Log10(y), math.Log10(top), math.Log10(bot)
	}
	return l.Top + (y-top)/(bot-top)*(l.Bottom-l.Top)
}

var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

// newPlot makes a plot in the report's style.
func newPlot(title, xlabel, ylabel string) *plot.Plot {
	p := plot.New()
	p.Title.Text = title
	p.Title.TextStyle.Font = font.From(sans, 12)
	p.Title.TextStyle.Color = inkColor
	p.Title.Padding = vg.Points(6)
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Label.TextStyle.Font = font.From(sans, 10)
		a.Label.TextStyle.Color = inkColor
		a.Tick.Label.Font = font.From(sans, 8.5)
		a.Tick.Label.Color = inkColor
		a.Color = inkColor
		a.Tick.Color = inkColor
	}
	p.X.Label.Text, p.Y.Label.Text = xlabel, ylabel
	p.Legend.TextStyle.Font = font.From(sans, 8.5)
	p.Legend.TextStyle.Color = inkColor
	p.Legend.Top = true
	p.Legend.Padding = vg.Points(3)
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = gridColor, gridColor
	g.Vertical.Width, g.Horizontal.Width = vg.Points(0.6), vg.Points(0.6)
	p.Add(g)
	return p
}

// canvas makes a white w × h pixel image canvas and returns it with its
// drawing area, inset by a small margin on the right (where no axis
// labels keep the data off the edge).
func canvas(w, h int) (*vgimg.Canvas, draw.Canvas) {
	c := vgimg.NewWith(vgimg.UseImage(image.NewRGBA(image.Rect(0, 0, w, h))), vgimg.UseDPI(dpi))
	return c, draw.Crop(draw.New(c), 0, -pxLen(16), 0, 0)
}

// layoutOf fills the pixel rectangle of a data canvas drawn on an image of
// height h (vg's origin is the bottom-left corner).
func layoutOf(dc draw.Canvas, w, h int) Layout {
	return Layout{Width: w, Height: h,
		Left: dc.Min.X.Dots(dpi), Right: dc.Max.X.Dots(dpi),
		Top: float64(h) - dc.Max.Y.Dots(dpi), Bottom: float64(h) - dc.Min.Y.Dots(dpi)}
}

// pngEncoder trades some file size for speed: the default level spends
// most of a picture's time in deflate.
var pngEncoder = png.Encoder{CompressionLevel: png.BestSpeed}

func writePNG(w io.Writer, c *vgimg.Canvas) error {
	return pngEncoder.Encode(w, c.Image())
}

// pxLen is a length of n pixels.
func pxLen(n float64) vg.Length { return vg.Length(n * 72 / dpi) }

// freqTicks labels a frequency axis in MHz: the offset from the centre,
// and below it the absolute frequency when the centre is known.
type freqTicks struct {
	centerMHz float64
	has       bool
}

func (t freqTicks) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(lo, hi)
	for i := range ts {
		if ts[i].IsMinor() {
			continue
		}
		off := ts[i].Label
		if !strings.HasPrefix(off, "-") && ts[i].Value != 0 {
			off = "+" + off
		}
		if t.has {
			dec := 3
			if j := strings.IndexByte(ts[i].Label, '.'); j >= 0 {
				dec = max(dec, len(ts[i].Label)-j-1)
			}
			off += "\n" + strconv.FormatFloat(t.centerMHz+ts[i].Value, 'f', dec, 64)
		}
		ts[i].Label = off
	}
	return ts
}

// downTicks labels an axis that holds −t so that t grows downwards.
type downTicks struct{}

func (downTicks) Ticks(lo, hi float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(-hi, -lo)
	for i := range ts {
		ts[i].Value = -ts[i].Value
	}
	return ts
}

// blankTicks keeps another ticker's marks but drops their labels.
type blankTicks struct{ plot.Ticker }

func (b blankTicks) Ticks(lo, hi float64) []plot.Tick {
	ts := b.Ticker.Ticks(lo, hi)
	for i := range ts {
		ts[i].Label = ""
	}
	return ts
}

func freqAxisLabel(s *Summary) string {
	if s.HasCenter {
		return "frequency: offset from centre (MHz), absolute below; centre " + MHz(s.CenterHz)
	}
	return "frequency offset from centre (MHz); centre unknown"
}

// specGrid adapts a Summary's grid to plotter.GridXYZ: columns are
// frequency (MHz), rows time as −ms so that time runs downwards. GridXYZ
// rows must ascend in Y, so grid row j is Summary row Rows−1−j.
type specGrid struct{ s *Summary }

func (g specGrid) Dims() (int, int) { return g.s.Cols, g.s.Rows }
func (g specGrid) Z(c, j int) float64 {
	return g.s.Grid[(g.s.Rows-1-j)*g.s.Cols+c]
}
func (g specGrid) X(c int) float64 {
	lo, hi := g.s.ColumnHz(c)
	return (lo + hi) / 2 / 1e6
}
func (g specGrid) Y(j int) float64 {
	t0, t1 := g.s.RowSeconds(g.s.Rows - 1 - j)
	return -(t0 + t1) / 2 * 1e3
}

// heatLayer draws a HeatMap without its per-cell glyph boxes (which
// would pad the data area away from the axes).
type heatLayer struct{ h *plotter.HeatMap }

func (l heatLayer) Plot(c draw.Canvas, p *plot.Plot)                { l.h.Plot(c, p) }
func (l heatLayer) DataRange() (float64, float64, float64, float64) { return l.h.DataRange() }

// colorRange picks the spectrogram's dB range: from 10 dB below the median
// cell (the noise) to the strongest cell, at least 30 dB above the
// median, in whole 5 dB steps.
func colorRange(grid []float64) (lo, hi float64) {
	v := make([]float64, 0, len(grid))
	for _, x := range grid {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			v = append(v, x)
		}
	}
	if len(v) == 0 {
		return -100, 0
	}
	sort.Float64s(v)
	med, peak := v[len(v)/2], v[len(v)-1]
	lo = math.Floor((med-10)/5) * 5
	hi = math.Ceil(math.Max(peak, med+30)/5) * 5
	return lo, hi
}

// eventBox is an event's extent on the spectrogram in its data
// coordinates (MHz, −ms).
type eventBox struct {
	x0, x1, y0, y1 float64
	color          color.NRGBA
	label          string
}

// boxes draws labelled event boxes.
type boxes []eventBox

func (bs boxes) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	minLen := pxLen(MinBoxPixels)
	lab := draw.TextStyle{Color: inkColor, Font: font.From(sans, 8.5), Handler: p.TextHandler,
		XAlign: draw.XLeft, YAlign: draw.YBottom}
	var placed []vg.Rectangle
	for _, b := range bs {
		x0, x1 := trX(b.x0), trX(b.x1)
		y0, y1 := trY(b.y1), trY(b.y0) // y1 is the later time: lower on the page
		if x1-x0 < minLen {
			m := (x0 + x1) / 2
			x0, x1 = m-minLen/2, m+minLen/2
		}
		if y1-y0 < minLen {
			m := (y0 + y1) / 2
			y0, y1 = m-minLen/2, m+minLen/2
		}
		x0, x1 = max(x0, c.Min.X), min(x1, c.Max.X)
		y0, y1 = max(y0, c.Min.Y), min(y1, c.Max.Y)
		sty := draw.LineStyle{Color: b.color, Width: pxLen(2.5)}
		c.StrokeLines(sty, []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}, {X: x0, Y: y0}})
		// The label sits on the box's upper-left corner, inside the data
		// area, moved down past labels already placed.
		w, h := lab.Width(b.label)+pxLen(6), lab.Height(b.label)+pxLen(2)
		r := vg.Rectangle{Min: vg.Point{X: x0, Y: y1 - h}, Max: vg.Point{X: x0 + w, Y: y1}}
		if r.Max.X > c.Max.X {
			r = vg.Rectangle{Min: vg.Point{X: c.Max.X - w, Y: r.Min.Y}, Max: vg.Point{X: c.Max.X, Y: r.Max.Y}}
		}
		for tries := 0; tries < 40 && overlapsAny(r, placed); tries++ {
			r.Min.Y -= h
			r.Max.Y -= h
		}
		placed = append(placed, r)
		c.FillPolygon(b.color, []vg.Point{r.Min, {X: r.Max.X, Y: r.Min.Y}, r.Max, {X: r.Min.X, Y: r.Max.Y}})
		c.FillText(lab, vg.Point{X: r.Min.X + pxLen(3), Y: r.Min.Y + pxLen(1)}, b.label)
	}
}

func overlapsAny(r vg.Rectangle, rs []vg.Rectangle) bool {
	for _, o := range rs {
		if r.Min.X < o.Max.X && o.Min.X < r.Max.X && r.Min.Y < o.Max.Y && o.Min.Y < r.Max.Y {
			return true
		}
	}
	return false
}

// EventLabel is how event i (0-based) of a capture is named on its
// pictures and in its table.
func EventLabel(i int, e detect.Event) string { return fmt.Sprintf("#%d %s", i+1, e.Class) }

// WriteSpectrogram draws the capture's spectrogram as a SpectrogramWidth ×
// SpectrogramHeight PNG on w: frequency across (offset from the centre,
// and absolute when known), time from the first sample downwards, colour
// in dBFS per bin with a colour bar, and each event as a box
// sample_start … sample_start+sample_count by offset ± bandwidth/2,
// labelled EventLabel. The Layout maps hertz (offset) and seconds to
// pixels.
func WriteSpectrogram(w io.Writer, s *Summary, events []detect.Event, title string) (Layout, error) {
	if s == nil || len(s.Grid) != s.Rows*s.Cols || s.Rows == 0 {
		return Layout{}, fmt.Errorf("report: spectrogram needs a finished summary")
	}
	cv, dc := canvas(SpectrogramWidth, SpectrogramHeight)
	lo, hi := colorRange(s.Grid)
	cm := newRamp(lo, hi)
	hm := plotter.NewHeatMap(specGrid{s}, cm.Palette(256))
	hm.Min, hm.Max = lo, hi
	hm.Underflow, hm.Overflow = rampStops[0], rampStops[len(rampStops)-1]
	hm.NaN = color.NRGBA{0x80, 0x80, 0x80, 0xff}
	hm.Rasterized = true

	p := newPlot(title, freqAxisLabel(s), "time from capture start (ms)")
	p.X.Padding, p.Y.Padding = 0, 0
	p.X.Tick.Marker = freqTicks{centerMHz: s.CenterHz / 1e6, has: s.HasCenter}
	p.Y.Tick.Marker = downTicks{}
	p.Add(heatLayer{hm})
	var bs boxes
	fs := s.SampleRate
	for i, e := range events {
		bs = append(bs, eventBox{
			x0: (e.OffsetHz - e.BandwidthHz/2) / 1e6, x1: (e.OffsetHz + e.BandwidthHz/2) / 1e6,
			y0: -float64(e.SampleStart) / fs * 1e3, y1: -float64(e.SampleStart+e.SampleCount) / fs * 1e3,
			color: ClassColor(e.Class), label: EventLabel(i, e)})
	}
	p.Add(bs)
	xmin, xmax, ymin, ymax := hm.DataRange()
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = xmin, xmax, ymin, ymax

	barW := pxLen(120)
	main := draw.Crop(dc, 0, -barW, 0, 0)
	p.Draw(main)
	da := p.DataCanvas(main)

	// The colour bar: a plot of its own in the right-hand strip, its
	// scale level with the spectrogram's data area.
	bar := newPlot("", "", "dBFS per bin")
	bar.HideX()
	bar.X.Padding, bar.Y.Padding = 0, 0
	bar.Add(&plotter.ColorBar{ColorMap: cm, Vertical: true, Colors: 256})
	barC := draw.Crop(dc, dc.Max.X-dc.Min.X-barW+pxLen(24), -pxLen(20), 0, 0)
	barC.Min.Y, barC.Max.Y = da.Min.Y, da.Max.Y
	bar.Draw(barC)

	l := layoutOf(da, SpectrogramWidth, SpectrogramHeight)
	l.XLeft, l.XRight = xmin*1e6, xmax*1e6
	l.YTop, l.YBottom = -ymax/1e3, -ymin/1e3
	l.XUnit, l.YUnit = "Hz from centre", "s from first sample"
	l.ColorMinDBFS, l.ColorMaxDBFS = lo, hi
	l.BoxesDrawn = len(bs)
	return l, writePalettedPNG(w, cv)
}

// decimate is the group size that folds n values into at most limit
// points.
func decimate(n, limit int) int { return max(1, (n+limit-1)/limit) }

// spans shades frequency or time ranges across the whole data area.
type spans struct {
	lo, hi []float64
	color  color.Color
}

func (s spans) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	for i := range s.lo {
		x0, x1 := max(trX(s.lo[i]), c.Min.X), min(trX(s.hi[i]), c.Max.X)
		if x1 <= x0 {
			x1 = x0 + pxLen(1)
		}
		c.FillPolygon(s.color, []vg.Point{{X: x0, Y: c.Min.Y}, {X: x1, Y: c.Min.Y}, {X: x1, Y: c.Max.Y}, {X: x0, Y: c.Max.Y}})
	}
}

func line(xys plotter.XYs, clr color.Color, width float64, dashed bool) *plotter.Line {
	l, err := plotter.NewLine(xys)
	if err != nil {
		panic("report: line of invalid points: " + err.Error())
	}
	l.Color = clr
	l.Width = pxLen(width)
	if dashed {
		l.Dashes = []vg.Length{pxLen(6), pxLen(4)}
	}
	return l
}

// excludedSpans lists the runs of excluded bins as frequency ranges (MHz).
func excludedSpans(s *Summary) spans {
	sp := spans{color: excludedShade}
	df := s.BinHz()
	for k := 0; k < len(s.Excluded); k++ {
		if !s.Excluded[k] {
			continue
		}
		j := k
		for j+1 < len(s.Excluded) && s.Excluded[j+1] {
			j++
		}
		sp.lo = append(sp.lo, (s.Offset(k)-df/2)/1e6)
		sp.hi = append(sp.hi, (s.Offset(j)+df/2)/1e6)
		k = j
	}
	return sp
}

// eventSpans lists the events' bands (MHz), one shade per class.
func eventSpans(events []detect.Event) []spans {
	by := map[string]*spans{}
	var order []string
	for _, e := range events {
		if e.Class == detect.ClassCN0Drop || e.Class == detect.ClassWidebandNoise {
			continue // the whole band: shading would hide the trace
		}
		sp, ok := by[e.Class]
		if !ok {
			c := ClassColor(e.Class)
			c.A = 0x38
			sp = &spans{color: c}
			by[e.Class] = sp
			order = append(order, e.Class)
		}
		sp.lo = append(sp.lo, (e.OffsetHz-e.BandwidthHz/2)/1e6)
		sp.hi = append(sp.hi, (e.OffsetHz+e.BandwidthHz/2)/1e6)
	}
	out := make([]spans, 0, len(order))
	for _, c := range order {
		out = append(out, *by[c])
	}
	return out
}

// maxLinePoints bounds the points of a per-bin trace.
const maxLinePoints = 2048

// WritePSD draws the capture's mean PSD against the noise reference (the
// site baseline, or the flat floor while there is none) as a PSDWidth ×
// PSDHeight PNG, in dBFS per bin over the frequency offset; excluded bins
// are shaded grey and event bands in their class colour.
func WritePSD(w io.Writer, s *Summary, events []detect.Event, title string) (Layout, error) {
	if s == nil || len(s.PSD) != s.FFTSize {
		return Layout{}, fmt.Errorf("report: PSD needs a finished summary")
	}
	cv, dc := canvas(PSDWidth, PSDHeight)
	p := newPlot(title, freqAxisLabel(s), fmt.Sprintf("dBFS per bin (%.3g kHz)", s.BinHz()/1e3))
	p.X.Tick.Marker = freqTicks{centerMHz: s.CenterHz / 1e6, has: s.HasCenter}
	p.Add(excludedSpans(s))
	for _, sp := range eventSpans(events) {
		p.Add(sp)
	}
	g := decimate(s.FFTSize, maxLinePoints)
	var psd, floor plotter.XYs
	skipped := 0
	for k0 := 0; k0 < s.FFTSize; k0 += g {
		var a, b float64
		var n int
		for k := k0; k < min(k0+g, s.FFTSize); k++ {
			if s.Excluded[k] {
				continue
			}
			a += s.PSD[k]
			b += s.Floor[k]
			n++
		}
		if n == 0 || !(a > 0) || !(b > 0) {
			skipped++
			continue
		}
		x := (s.Offset(k0) + s.Offset(min(k0+g, s.FFTSize)-1)) / 2 / 1e6
		psd = append(psd, plotter.XY{X: x, Y: dB(a / float64(n))})
		floor = append(floor, plotter.XY{X: x, Y: dB(b / float64(n))})
	}
	if len(psd) < 2 {
		return Layout{}, fmt.Errorf("report: PSD has fewer than two usable bins")
	}
	lp := line(psd, psdColor, 1.2, false)
	lf := line(floor, floorColor, 1.6, true)
	p.Add(lp, lf)
	p.Legend.Add("mean PSD of the capture", lp)
	if s.HasBaseline {
		p.Legend.Add("site baseline", lf)
	} else {
		p.Legend.Add("flat floor (no site baseline yet)", lf)
	}
	p.X.Min, p.X.Max = (s.Offset(0)-s.BinHz()/2)/1e6, (s.Offset(s.FFTSize-1)+s.BinHz()/2)/1e6
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range psd {
		lo, hi = math.Min(lo, math.Min(psd[i].Y, floor[i].Y)), math.Max(hi, math.Max(psd[i].Y, floor[i].Y))
	}
	p.Y.Min, p.Y.Max = lo-3, hi+6
	p.Draw(dc)
	l := layoutOf(p.DataCanvas(dc), PSDWidth, PSDHeight)
	l.XLeft, l.XRight, l.YTop, l.YBottom = p.X.Min*1e6, p.X.Max*1e6, p.Y.Max, p.Y.Min
	l.XUnit, l.YUnit, l.PointsSkipped = "Hz from centre", "dBFS per bin", skipped
	return l, writePNG(w, cv)
}

// skFloor is the smallest SK drawn on the log axis (a strong tone drives
// the estimator towards 0).
const skFloor = 1e-3

// WriteSK draws the per-bin spectral kurtosis (maximum and mean over the
// blocks) with the lower and upper thresholds for the block size as an
// SKWidth × SKHeight PNG, on a logarithmic axis. Excluded bins are shaded.
func WriteSK(w io.Writer, s *Summary, title string) (Layout, error) {
	if s == nil || s.SKBlocks == 0 {
		return Layout{}, fmt.Errorf("report: no block long enough for spectral kurtosis")
	}
	cv, dc := canvas(SKWidth, SKHeight)
	p := newPlot(title, freqAxisLabel(s), fmt.Sprintf("SK (M = %d)", s.SKFrames))
	p.X.Tick.Marker = freqTicks{centerMHz: s.CenterHz / 1e6, has: s.HasCenter}
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = plot.LogTicks{Prec: -1}
	p.Add(excludedSpans(s))
	g := decimate(s.FFTSize, maxLinePoints)
	var mx, mean plotter.XYs
	lo, hi := math.Inf(1), math.Inf(-1)
	for k0 := 0; k0 < s.FFTSize; k0 += g {
		a, b, n := math.Inf(-1), 0.0, 0
		for k := k0; k < min(k0+g, s.FFTSize); k++ {
			if s.Excluded[k] {
				continue
			}
			a = math.Max(a, s.SKMax[k])
			b += s.SKMean[k]
			n++
		}
		if n == 0 {
			continue
		}
		x := (s.Offset(k0) + s.Offset(min(k0+g, s.FFTSize)-1)) / 2 / 1e6
		a, b = math.Max(a, skFloor), math.Max(b/float64(n), skFloor)
		mx = append(mx, plotter.XY{X: x, Y: a})
		mean = append(mean, plotter.XY{X: x, Y: b})
		lo, hi = math.Min(lo, math.Min(a, b)), math.Max(hi, a)
	}
	if len(mx) < 2 {
		return Layout{}, fmt.Errorf("report: SK has fewer than two usable bins")
	}
	lmx := line(mx, skMaxColor, 1.1, false)
	lmean := line(mean, skMeanColor, 1.1, false)
	p.Add(lmx, lmean)
	p.Legend.Add("maximum over blocks", lmx)
	p.Legend.Add("mean over blocks", lmean)
	x0, x1 := (s.Offset(0)-s.BinHz()/2)/1e6, (s.Offset(s.FFTSize-1)+s.BinHz()/2)/1e6
	for i, t := range s.SKThreshold {
		if !(t > 0) || math.IsInf(t, 0) {
			continue
		}
		lt := line(plotter.XYs{{X: x0, Y: t}, {X: x1, Y: t}}, thresholdClr, 1.3, true)
		p.Add(lt)
		if i == 0 {
			p.Legend.Add(fmt.Sprintf("thresholds %.3f and %.3f", s.SKThreshold[0], s.SKThreshold[1]), lt)
		}
		lo, hi = math.Min(lo, t), math.Max(hi, t)
	}
	p.X.Min, p.X.Max = x0, x1
	// Whole decades: LogTicks marks up to the next power of ten, and a
	// mark beyond the axis would squeeze the data area. The lower end is
	// nudged down so that LogTicks (which truncates log10 of it) starts
	// at that decade, not the next.
	p.Y.Min = math.Pow(10, math.Floor(math.Log10(lo/1.2))) * 0.999
	p.Y.Max = math.Pow(10, math.Ceil(math.Log10(hi*1.2)))
	p.Draw(dc)
	l := layoutOf(p.DataCanvas(dc), SKWidth, SKHeight)
	l.XLeft, l.XRight, l.YTop, l.YBottom, l.YLog = x0*1e6, x1*1e6, p.Y.Max, p.Y.Min, true
	l.XUnit, l.YUnit = "Hz from centre", "SK"
	return l, writePNG(w, cv)
}

// tickMarks draws short vertical marks at the top of the data area.
type tickMarks struct {
	xs    []float64
	color color.Color
}

func (t tickMarks) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	sty := draw.LineStyle{Color: t.color, Width: pxLen(1)}
	var lines [][]vg.Point
	for _, x := range t.xs {
		px := trX(x)
		if px < c.Min.X || px > c.Max.X {
			continue
		}
		lines = append(lines, []vg.Point{{X: px, Y: c.Max.Y}, {X: px, Y: c.Max.Y - pxLen(12)}})
	}
	if len(lines) > 0 {
		c.StrokeLines(sty, lines...)
	}
}

// Thumbnail lets tickMarks appear in a legend.
func (t tickMarks) Thumbnail(c *draw.Canvas) {
	x := (c.Min.X + c.Max.X) / 2
	c.StrokeLine2(draw.LineStyle{Color: t.color, Width: pxLen(1.5)}, x, c.Min.Y, x, c.Max.Y)
}

// PulseArrivals says what the envelope's marks count in the event table's
// unit, pulses (issue 18: "677 pulse arrivals" beside "1352 pulses"): an
// arrival of a pulse pair is two pulses.
func PulseArrivals(s *Summary) string {
	single := s.PulsesSeen - s.PairsSeen
	switch {
	case s.PairsSeen == 0:
		return fmt.Sprintf("%s detected", Count(s.PulsesSeen, "pulse"))
	case single == 0:
		return fmt.Sprintf("%s detected (%s)", Count(2*s.PairsSeen, "pulse"), Count(s.PairsSeen, "pair"))
	}
	return fmt.Sprintf("%s detected (%s, %d single)", Count(2*s.PairsSeen+single, "pulse"), Count(s.PairsSeen, "pair"), single)
}

// Count is n and the noun, with an s unless n is 1.
func Count(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return fmt.Sprintf("%d %ss", n, noun)
}

// WriteEnvelope draws the power envelope (mean frame power and peak
// sample power per point, dBFS) against time with the detected pulse
// arrivals marked at the top, as an EnvelopeWidth × EnvelopeHeight PNG.
func WriteEnvelope(w io.Writer, s *Summary, title string) (Layout, error) {
	if s == nil || len(s.EnvMean) == 0 {
		return Layout{}, fmt.Errorf("report: envelope needs a finished summary")
	}
	cv, dc := canvas(EnvelopeWidth, EnvelopeHeight)
	p := newPlot(title, "time from capture start (ms)", "power (dBFS)")
	step := float64(s.EnvFrames) * s.FrameSeconds() * 1e3
	var mean, peak plotter.XYs
	lo, hi := math.Inf(1), math.Inf(-1)
	for i := range s.EnvMean {
		if !(s.EnvMean[i] > 0) || !(s.EnvPeak[i] > 0) {
			continue
		}
		x := (float64(i) + 0.5) * step
		a, b := dB(s.EnvMean[i]), dB(s.EnvPeak[i])
		mean = append(mean, plotter.XY{X: x, Y: a})
		peak = append(peak, plotter.XY{X: x, Y: b})
		lo, hi = math.Min(lo, a), math.Max(hi, b)
	}
	if len(mean) < 2 {
		return Layout{}, fmt.Errorf("report: envelope has fewer than two points")
	}
	lpk := line(peak, peakColor, 1, false)
	lmn := line(mean, meanPwrColor, 1.4, false)
	p.Add(lpk, lmn)
	p.Legend.Add(fmt.Sprintf("peak |x|² per %.3g ms", step), lpk)
	p.Legend.Add("mean frame power", lmn)
	if len(s.Pulses) > 0 {
		tm := tickMarks{color: ClassColor(detect.ClassPulsed)}
		for _, g := range s.Pulses {
			tm.xs = append(tm.xs, float64(g)/s.SampleRate*1e3)
		}
		p.Add(tm)
		lbl := PulseArrivals(s)
		if s.PulsesSeen > len(s.Pulses) {
			lbl += fmt.Sprintf(" (first %d marked)", len(s.Pulses))
		}
		p.Legend.Add(lbl, tm)
	}
	p.X.Min, p.X.Max = 0, float64(len(s.EnvMean))*step
	p.Y.Min, p.Y.Max = lo-3, hi+10
	p.Legend.YOffs = -pxLen(16) // below the pulse marks
	p.Draw(dc)
	l := layoutOf(p.DataCanvas(dc), EnvelopeWidth, EnvelopeHeight)
	l.XLeft, l.XRight, l.YTop, l.YBottom = p.X.Min/1e3, p.X.Max/1e3, p.Y.Max, p.Y.Min
	l.XUnit, l.YUnit = "s from first sample", "dBFS"
	return l, writePNG(w, cv)
}
