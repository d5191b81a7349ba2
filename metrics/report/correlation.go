package report

import (
	"fmt"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"

	"quietband/detect"
)

// CorrelationWidth × CorrelationHeight is the size of a spoofing event's
// per-PRN correlation picture.
const CorrelationWidth, CorrelationHeight = 500, 300

// maxCorrelationPictures bounds the per-PRN pictures of one spoofing
// event (a counterfeit sky may name every satellite).
const maxCorrelationPictures = 12

// WriteCorrelation draws one PRN of a spoofing event: the correlation
// power over the noise (dB; 0 dB is the noise, a peak of SNR λ per 1 ms
// reads 10·log10(1 + λ)) against code phase, with both peaks marked, as a
// CorrelationWidth × CorrelationHeight PNG. The x axis is the arrival
// delay relative to the strongest peak in chips (a later arrival to the
// right). When the two peaks lie in one segment (a copy within a few
// chips, as a meacon's), both are drawn on it at their delays; when the
// second lies far away or at another Doppler (a counterfeit), its own
// segment is drawn shifted onto the first's axis, dashed, and the
// legend gives its true delay and Doppler.
func WriteCorrelation(w io.Writer, pp detect.PeakPair, title string) (Layout, error) {
	if len(pp.Profile) == 0 || len(pp.Profile[0].PowerDB) < 2 {
		return Layout{}, fmt.Errorf("report: PRN %d has no correlation profile", pp.PRN)
	}
	cv, dc := canvas(CorrelationWidth, CorrelationHeight)
	p := newPlot(title, "arrival delay from the strongest peak (chips)", "correlation power over noise (dB)")
	xy := func(s detect.ProfileSegment, shift float64) plotter.XYs {
		out := make(plotter.XYs, len(s.PowerDB))
		for i, v := range s.PowerDB {
			out[i] = plotter.XY{X: s.StartChips + float64(i)*s.StepChips - shift, Y: float64(v)}
		}
		return out
	}
	clr := ClassColor(detect.ClassSpoofing)
	first := line(xy(pp.Profile[0], 0), psdColor, 1.4, false)
	p.Add(first)
	p.Legend.Add(fmt.Sprintf("around the strongest peak (%+.0f Hz)", pp.First.DopplerHz), first)
	secondX := pp.DelayChips
	if len(pp.Profile) > 1 {
		// The second peak's own row, moved onto the first's axis.
		sec := line(xy(pp.Profile[1], pp.DelayChips), floorColor, 1.4, true)
		p.Add(sec)
		p.Legend.Add(fmt.Sprintf("second peak: %+.2f chips, %+.0f Hz, shifted", pp.DelayChips, pp.Second.DopplerHz), sec)
		secondX = 0
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	xlo, xhi := math.Inf(1), math.Inf(-1)
	for i, s := range pp.Profile {
		shift := 0.0
		if i > 0 {
			shift = pp.DelayChips
		}
		for _, q := range xy(s, shift) {
			lo, hi = math.Min(lo, q.Y), math.Max(hi, q.Y)
			xlo, xhi = math.Min(xlo, q.X), math.Max(xhi, q.X)
		}
	}
	// Both peaks marked: a vertical line at each, labelled.
	mark := func(x float64, label string) {
		m := line(plotter.XYs{{X: x, Y: lo - 1}, {X: x, Y: hi + 1}}, clr, 2.4, false)
		p.Add(m)
		if label != "" {
			p.Legend.Add(label, m)
		}
	}
	mark(0, "")
	mark(secondX, fmt.Sprintf("peaks: second %.1f dB below the first", -pp.SecondDB))
	p.X.Min, p.X.Max = xlo, xhi
	p.Y.Min, p.Y.Max = lo-1, hi+4
	p.X.Tick.Marker = plot.DefaultTicks{}
	p.Draw(dc)
	l := layoutOf(p.DataCanvas(dc), CorrelationWidth, CorrelationHeight)
	l.XLeft, l.XRight, l.YTop, l.YBottom = p.X.Min, p.X.Max, p.Y.Max, p.Y.Min
	l.XUnit, l.YUnit = "chips of arrival delay from the strongest peak", "dB over the noise"
	return l, writePNG(w, cv)
}
