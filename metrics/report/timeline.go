package report

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"sort"
	"time"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"quietband/detect"
)

// timeline is what the site timeline needs of every capture: a few
// numbers each, however many captures there are.
type timeline struct {
	noTime   bool // some capture has no start time: x is the capture index
	offAxis  int  // captures dated far from the rest (outliers): drawn in order, not at their time
	outliers bool // dropOutliers ran
	captures []tlCapture
	events   []tlEvent
}

type tlCapture struct {
	x, dur      float64 // start (Unix seconds) and duration (s)
	hasStart    bool
	quarantined bool
	cn0, agc    float64 // NaN when unknown
}

type tlEvent struct {
	class  string
	capIdx int
	t0, t1 float64 // Unix seconds; NaN when unknown
	jn     float64
}

func (t *timeline) add(rec detect.CaptureRecord, events []detect.Event) {
	c := tlCapture{cn0: math.NaN(), agc: math.NaN(), quarantined: rec.Status == detect.StatusQuarantined}
	idx := float64(len(t.captures))
	c.x, c.dur = idx, 1
	if rec.Start != nil && !rec.Start.IsZero() {
		c.x, c.hasStart = unix(rec.Start.Time), true
		if rec.SampleRate > 0 {
			c.dur = float64(rec.Samples) / rec.SampleRate
		}
	} else if !c.quarantined {
		// A quarantined capture has no start in its record; it is drawn
		// after the previous one. Any other capture without a time
		// turns the axis into the capture index.
		t.noTime = true
	}
	if rec.Stats != nil {
		c.cn0 = detect.StrongestMean(rec.Stats.Satellites, detect.Strongest)
		if v, ok := PowerOverBaseline(rec.Stats); ok {
			c.agc = v
		}
	}
	t.captures = append(t.captures, c)
	for _, e := range events {
		ev := tlEvent{class: e.Class, jn: math.NaN(), capIdx: int(idx), t0: math.NaN(), t1: math.NaN()}
		if jn, ok := JN(e); ok {
			ev.jn = jn
		}
		if !e.Start.IsZero() && !e.End.IsZero() {
			ev.t0, ev.t1 = unix(e.Start.Time), unix(e.End.Time)
		}
		t.events = append(t.events, ev)
	}
}

// firstStart is the earliest start among the captures (0 if none).
func (t *timeline) firstStart() float64 {
	first := math.Inf(1)
	for _, c := range t.captures {
		if c.hasStart {
			first = math.Min(first, c.x)
		}
	}
	if math.IsInf(first, 0) {
		return 0
	}
	return first
}

func unix(t time.Time) float64 { return float64(t.UnixNano()) / 1e9 }

// ranges places the captures on the x axis and returns the axis range.
func (t *timeline) ranges() (xs []float64, lo, hi float64) {
	t.dropOutliers()
	lo, hi = math.Inf(1), math.Inf(-1)
	next := math.NaN() // end of the previous capture placed
	for i, c := range t.captures {
		x0, x1 := c.x, c.x+c.dur
		switch {
		case t.noTime:
			x0, x1 = float64(i), float64(i)+c.dur
		case !c.hasStart && !math.IsNaN(next):
			x0, x1 = next, next+c.dur
		case !c.hasStart:
			// Before any timed capture: just before the first one.
			x0 = t.firstStart() - c.dur
			x1 = x0 + c.dur
		}
		if !math.IsNaN(x1) {
			next = x1
		}
		xs = append(xs, x0)
		lo, hi = math.Min(lo, x0), math.Max(hi, x1)
	}
	if math.IsInf(lo, 0) {
		lo, hi = 0, 1
	}
	pad := math.Max((hi-lo)*0.02, 1)
	return xs, lo - pad, hi + pad
}

// outlierGapFactor and minOutlierGap set how far from the rest a capture's
// time must lie to be left off the time axis: a gap between consecutive
// capture starts larger than outlierGapFactor times their median gap, and
// larger than minOutlierGap, splits the captures into groups, and only the
// largest group keeps its times (issue 18 item 7: one capture dated by its
// file's modification time squeezed a month of captures into one line).
const (
	outlierGapFactor = 50
	minOutlierGap    = 6 * 3600 // seconds
)

// dropOutliers takes the captures outside the largest group of capture
// times (see outlierGapFactor) off the time axis: they are drawn after the
// capture before them, like a capture without a time, and counted in
// offAxis. Idempotent.
func (t *timeline) dropOutliers() {
	if t.outliers {
		return
	}
	t.outliers = true
	var idx []int
	for i, c := range t.captures {
		if c.hasStart {
			idx = append(idx, i)
		}
	}
	if len(idx) < 3 || t.noTime {
		return
	}
	sort.Slice(idx, func(a, b int) bool { return t.captures[idx[a]].x < t.captures[idx[b]].x })
	gaps := make([]float64, 0, len(idx)-1)
	for k := 1; k < len(idx); k++ {
		gaps = append(gaps, t.captures[idx[k]].x-t.captures[idx[k-1]].x)
	}
	med := append([]float64(nil), gaps...)
	sort.Float64s(med)
	limit := math.Max(outlierGapFactor*med[len(med)/2], minOutlierGap)
	// The largest run of captures whose consecutive gaps stay within limit.
	bestFrom, bestTo, from := 0, 0, 0
	for k := 1; k <= len(idx); k++ {
		if k == len(idx) || gaps[k-1] > limit {
			if k-from > bestTo-bestFrom {
				bestFrom, bestTo = from, k
			}
			from = k
		}
	}
	for k, i := range idx {
		if k < bestFrom || k >= bestTo {
			t.captures[i].hasStart = false
			t.offAxis++
		}
	}
	// Their events go with their capture's slot.
	for j := range t.events {
		if !t.captures[t.events[j].capIdx].hasStart {
			t.events[j].t0, t.events[j].t1 = math.NaN(), math.NaN()
		}
	}
}

// bars draws horizontal bars [x0, x1] on lanes, at least 3 pixels wide.
type bars struct {
	x0, x1, lane []float64
	color        []color.Color
}

func (b bars) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for i := range b.x0 {
		x0, x1 := trX(b.x0[i]), trX(b.x1[i])
		if x1-x0 < pxLen(3) {
			m := (x0 + x1) / 2
			x0, x1 = m-pxLen(1.5), m+pxLen(1.5)
		}
		y0, y1 := trY(b.lane[i]-0.32), trY(b.lane[i]+0.32)
		c.FillPolygon(b.color[i], []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}})
	}
}

// vlines draws dashed vertical lines across the data area (quarantined
// captures).
type vlines struct {
	xs    []float64
	color color.Color
}

func (v vlines) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	sty := draw.LineStyle{Color: v.color, Width: pxLen(1.5), Dashes: []vg.Length{pxLen(4), pxLen(3)}}
	for _, x := range v.xs {
		px := trX(x)
		if px >= c.Min.X && px <= c.Max.X {
			c.StrokeLine2(sty, px, c.Min.Y, px, c.Max.Y)
		}
	}
}

func (v vlines) Thumbnail(c *draw.Canvas) {
	x := (c.Min.X + c.Max.X) / 2
	c.StrokeLine2(draw.LineStyle{Color: v.color, Width: pxLen(1.5), Dashes: []vg.Length{pxLen(3), pxLen(2)}}, x, c.Min.Y, x, c.Max.Y)
}

func timeTicker(useTime bool) plot.Ticker {
	if !useTime {
		return plot.DefaultTicks{}
	}
	return timeTicks{}
}

// timeTicks marks a Unix-seconds axis at round clock times: the step is
// the first of 1, 2, 5, 10, 15, 30 s, 1, 2, 5, 10, 15, 30 min, 1, 2, 3,
// 6, 12 h, 1, 2, 7, 14, 28 days giving at most seven labels, with a
// minor mark between labels.
type timeTicks struct{}

var clockSteps = []float64{1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800,
	3600, 7200, 10800, 21600, 43200, 86400, 172800, 604800, 1209600, 2419200}

func (timeTicks) Ticks(lo, hi float64) []plot.Tick {
	step := clockSteps[len(clockSteps)-1]
	for _, s := range clockSteps {
		if (hi-lo)/s <= 7 {
			step = s
			break
		}
	}
	format := "15:04:05"
	switch {
	case step >= 86400:
		format = "2006-01-02"
	case hi-lo > 86400:
		format = "Jan 2 15:04"
	case step >= 60:
		format = "15:04"
	}
	var ts []plot.Tick
	for v := math.Ceil(lo/step) * step; v <= hi; v += step {
		ts = append(ts, plot.Tick{Value: v, Label: time.Unix(int64(v), 0).UTC().Format(format)})
		if m := v + step/2; m <= hi {
			ts = append(ts, plot.Tick{Value: m})
		}
	}
	if first := math.Ceil(lo/step)*step - step/2; first >= lo {
		ts = append(ts, plot.Tick{Value: first})
	}
	return ts
}

// series splits points at NaN values into runs that can be drawn as lines.
func series(xs, ys []float64) []plotter.XYs {
	var out []plotter.XYs
	var cur plotter.XYs
	for i := range xs {
		if math.IsNaN(ys[i]) || math.IsInf(ys[i], 0) {
			if len(cur) > 0 {
				out = append(out, cur)
			}
			cur = nil
			continue
		}
		cur = append(cur, plotter.XY{X: xs[i], Y: ys[i]})
	}
	if len(cur) > 0 {
		out = append(out, cur)
	}
	return out
}

// write draws the site timeline over all captures as a
// TimelineWidth × TimelineHeight PNG: events as bars on one lane per
// class (quarantined captures on a lane of their own), J/N of each event
// by class, the mean C/N0 of the strongest four satellites per capture,
// and the in-band power over the baseline (PowerOverBaseline).
// Quarantined captures are marked by a dashed line on every panel.
func (t *timeline) write(w io.Writer) (Layout, error) {
	cv, dc := canvas(TimelineWidth, TimelineHeight)
	xs, lo, hi := t.ranges()
	xlabel := "capture (in analysis order)"
	if !t.noTime {
		xlabel = "time (UTC)"
	}
	tick := timeTicker(!t.noTime)
	var quar vlines
	quar.color = quarantColor
	for i, c := range t.captures {
		if c.quarantined {
			quar.xs = append(quar.xs, xs[i])
		}
	}
	// Events sit at their times, or on their capture's slot when the
	// axis is the capture index (or the event has no times).
	evX := func(e tlEvent) (float64, float64) {
		if !t.noTime && !math.IsNaN(e.t0) {
			return e.t0, e.t1
		}
		c := t.captures[e.capIdx]
		return xs[e.capIdx], xs[e.capIdx] + c.dur
	}

	// Panel 1: events as bars by class.
	pe := newPlot("", "", "")
	lanes := append(append([]string(nil), detect.Classes...), "quarantined")
	var ticks plot.ConstantTicks
	for i, name := range lanes {
		ticks = append(ticks, plot.Tick{Value: float64(len(lanes) - 1 - i), Label: name})
	}
	pe.Y.Tick.Marker = ticks
	pe.Y.Min, pe.Y.Max = -0.6, float64(len(lanes))-0.4
	laneOf := map[string]float64{}
	for i, name := range lanes {
		laneOf[name] = float64(len(lanes) - 1 - i)
	}
	var b bars
	for _, e := range t.events {
		ln, ok := laneOf[e.class]
		if !ok {
			continue
		}
		x0, x1 := evX(e)
		b.x0, b.x1, b.lane, b.color = append(b.x0, x0), append(b.x1, x1), append(b.lane, ln), append(b.color, ClassColor(e.class))
	}
	for i, c := range t.captures {
		if c.quarantined {
			b.x0, b.x1 = append(b.x0, xs[i]), append(b.x1, xs[i]+c.dur)
			b.lane, b.color = append(b.lane, laneOf["quarantined"]), append(b.color, quarantColor)
		}
	}
	pe.Add(b, quar)

	// Panel 2: J/N of each event by class.
	pj := newPlot("", "", "J/N (dB)")
	pj.Add(quar)
	jlo, jhi := math.Inf(1), math.Inf(-1)
	for _, class := range detect.Classes {
		var pts plotter.XYs
		for _, e := range t.events {
			if e.class == class && !math.IsNaN(e.jn) && !math.IsInf(e.jn, 0) {
				x0, x1 := evX(e)
				pts = append(pts, plotter.XY{X: (x0 + x1) / 2, Y: e.jn})
				jlo, jhi = math.Min(jlo, e.jn), math.Max(jhi, e.jn)
			}
		}
		if len(pts) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(pts)
		if err != nil {
			return Layout{}, fmt.Errorf("report: timeline J/N: %w", err)
		}
		sc.GlyphStyle = draw.GlyphStyle{Color: ClassColor(class), Radius: pxLen(4), Shape: draw.CircleGlyph{}}
		pj.Add(sc)
		pj.Legend.Add(class, sc)
	}
	if math.IsInf(jlo, 0) {
		jlo, jhi = 0, 10
	}
	pj.Y.Min, pj.Y.Max = math.Floor(jlo-2), math.Ceil(jhi+4)

	// Panels 3 and 4: per-capture C/N0 and in-band power over baseline.
	cn0 := make([]float64, len(t.captures))
	agc := make([]float64, len(t.captures))
	mid := make([]float64, len(t.captures))
	for i, c := range t.captures {
		cn0[i], agc[i] = c.cn0, c.agc
		mid[i] = xs[i] + c.dur/2
		if t.noTime {
			mid[i] = xs[i] + 0.5
		}
	}
	pc := newPlot("", "", "C/N0 top 4 (dB-Hz)")
	pa := newPlot("", xlabel, PowerOverBaselineWords+" (dB)")
	for _, pl := range []struct {
		p   *plot.Plot
		ys  []float64
		clr color.Color
	}{{pc, cn0, psdColor}, {pa, agc, floorColor}} {
		pl.p.Add(quar)
		ylo, yhi := math.Inf(1), math.Inf(-1)
		for _, run := range series(mid, pl.ys) {
			ln, sc, err := plotter.NewLinePoints(run)
			if err != nil {
				return Layout{}, fmt.Errorf("report: timeline: %w", err)
			}
			ln.Color, ln.Width = pl.clr, pxLen(1.4)
			sc.GlyphStyle = draw.GlyphStyle{Color: pl.clr, Radius: pxLen(2.5), Shape: draw.CircleGlyph{}}
			pl.p.Add(ln, sc)
			for _, xy := range run {
				ylo, yhi = math.Min(ylo, xy.Y), math.Max(yhi, xy.Y)
			}
		}
		if math.IsInf(ylo, 0) {
			ylo, yhi = 0, 1
		}
		pad := math.Max((yhi-ylo)*0.15, 0.5)
		pl.p.Y.Min, pl.p.Y.Max = ylo-pad, yhi+pad
	}
	if len(quar.xs) > 0 {
		pa.Legend.Add("quarantined capture", quar)
	}

	panels := []*plot.Plot{pe, pj, pc, pa}
	for i, p := range panels {
		p.X.Min, p.X.Max = lo, hi
		p.X.Tick.Marker = tick
		if i < len(panels)-1 {
			p.X.Tick.Marker = blankTicks{tick}
		}
	}
	grid := [][]*plot.Plot{{pe}, {pj}, {pc}, {pa}}
	tiles := draw.Tiles{Rows: 4, Cols: 1, PadTop: pxLen(4), PadBottom: pxLen(4), PadLeft: pxLen(4), PadRight: pxLen(14), PadY: pxLen(8)}
	cs := plot.Align(grid, tiles, dc)
	for i, p := range panels {
		p.Draw(cs[i][0])
	}
	l := layoutOf(pe.DataCanvas(cs[0][0]), TimelineWidth, TimelineHeight)
	l.XLeft, l.XRight, l.YTop, l.YBottom = lo, hi, pe.Y.Max, pe.Y.Min
	l.XUnit, l.YUnit = "Unix seconds", "lane"
	if t.noTime {
		l.XUnit = "capture index"
	}
	return l, writePNG(w, cv)
}
