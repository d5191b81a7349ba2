package report

import (
	"bytes"
	"crypto/sha256"
	"embed"
	"encoding/base64"
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"quietband/detect"
	"quietband/ingest"
)

//go:embed page.html.tmpl page.css check.js
var assets embed.FS

// pageTemplate is the report page. File-derived strings (capture names,
// errors, labels) reach it only as plain strings, so html/template
// escapes them in every context.
var pageTemplate = template.Must(template.New("page.html.tmpl").Funcs(template.FuncMap{
	"classSlug": func(c string) string { return classSlug(c) },
}).ParseFS(assets, "page.html.tmpl"))

// Options configure a Report.
type Options struct {
	// All draws the pictures of every capture, not only of those with
	// events.
	All bool
	// Title heads the page (default "quietband report").
	Title string
	// Source says what was analysed (folders, a log), under the title.
	Source string
	// Workers is how many captures' pictures are drawn at once, while the
	// caller goes on with the next capture (default 2). Each holds one
	// Summary; the output does not depend on it.
	Workers int
}

// Report builds the analyst's report in a folder: index.html, the PNG
// pictures beside it and report.json (the pictures' layouts, for tools).
// Captures are added in analysis order; each capture's pictures are drawn
// and written in the background as it is added (at most Options.Workers
// at a time), so memory holds the small per-capture rows of the page and
// at most Workers summaries, never more. A Report is used from one
// goroutine.
type Report struct {
	dir      string
	opts     Options
	tl       timeline
	rows     []captureRow
	sections []*section
	classes  map[string]*classAcc
	all      classAcc
	meta     []*captureMeta
	quar     []quarRow
	n        int

	slots chan struct{}
	wg    sync.WaitGroup
	mu    sync.Mutex
	err   error // first failure of a background drawing
}

// New prepares a report in dir (created if missing).
func New(dir string, opts Options) (*Report, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	if opts.Title == "" {
		opts.Title = "quietband report"
	}
	if opts.Workers <= 0 {
		opts.Workers = 2
	}
	return &Report{dir: dir, opts: opts, classes: map[string]*classAcc{}, slots: make(chan struct{}, opts.Workers)}, nil
}

// Dir is the report's folder.
func (r *Report) Dir() string { return r.dir }

// captureRow is one line of the page's capture index.
type captureRow struct {
	N                   int
	Anchor              string // "" when the capture has no section
	Name, Start, Status string
	Events              int
	Power, Floor, AGC   string
	CN0, Error          string
	Quarantined         bool
}

type quarRow struct{ Name, Error string }

// section is the detail of one capture on the page.
type section struct {
	Anchor, Name string
	Facts        []fact
	Pictures     []picture
	Notes        []string // pictures that could not be drawn, with why
	Events       []eventRow
	Sats         []satRow
	GNSSSkipped  string
}

type fact struct{ Key, Value string }

type picture struct {
	File          string
	Width, Height int
	Alt, Caption  string
}

type eventRow struct {
	Label, Class, Start, Duration, Offset, Absolute, Bandwidth string
	JN, Power, Loss, Detail, Detectors, ID                     string
}

type satRow struct{ System, PRN, CN0, Doppler, CodePhase string }

// captureMeta is a capture's entry in report.json.
type captureMeta struct {
	N        int      `json:"n"`
	Capture  string   `json:"capture"`
	Status   string   `json:"status"`
	Events   int      `json:"events"`
	Pictures []Layout `json:"pictures,omitempty"`
}

// Capture is one capture for the report.
type Capture struct {
	Record detect.CaptureRecord
	Events []detect.Event
	// Summary is what the capture's Observer built; nil when the capture
	// was not analysed here (quarantined, or its file is gone).
	Summary *Summary
	// Note is shown with the capture's pictures: why there are none, or
	// what to know about them.
	Note string
}

// Add puts one capture on the report. Pictures are drawn for captures
// with events, or for all with Options.All, in the background: Add keeps
// c.Events and c.Summary until then, and the caller must not change them.
// It returns the error of an earlier background drawing, if one failed.
func (r *Report) Add(c Capture) error {
	if err := r.failed(); err != nil {
		return err
	}
	rec, events, s := c.Record, c.Events, c.Summary
	r.n++
	r.tl.add(rec, events)
	for _, e := range events {
		r.class(e.Class).add(e, rec.SampleRate)
		r.all.add(e, rec.SampleRate)
	}
	quar := rec.Status == detect.StatusQuarantined
	row := captureRow{N: r.n, Name: rec.Capture, Status: rec.Status, Events: len(events), Quarantined: quar,
		Start: "–", Power: "–", Floor: "–", AGC: "–", CN0: "–", Error: rec.Error}
	if rec.Start != nil && !rec.Start.IsZero() {
		row.Start = rec.Start.UTC().Format("2006-01-02 15:04:05")
	}
	if st := rec.Stats; st != nil {
		row.Power, row.Floor = f1(st.PowerDBFS), f1(st.NoiseFloorDBFS)
		if v, ok := PowerOverBaseline(st); ok {
			row.AGC = signed(v, 2)
		}
		if c := detect.StrongestMean(st.Satellites, detect.Strongest); !math.IsNaN(c) {
			row.CN0 = f1(c)
		}
	}
	meta := &captureMeta{N: r.n, Capture: rec.Capture, Status: rec.Status, Events: len(events)}
	if quar {
		r.quar = append(r.quar, quarRow{Name: rec.Capture, Error: rec.Error})
	}
	if len(events) > 0 || (r.opts.All && s != nil) {
		sec := r.tables(rec, events)
		if c.Note != "" {
			sec.Notes = append(sec.Notes, c.Note)
		}
		row.Anchor = sec.Anchor
		r.sections = append(r.sections, sec)
		if s != nil && !quar {
			base := fmt.Sprintf("c%04d-%s", r.n, slug(rec.Capture))
			r.slots <- struct{}{}
			r.wg.Add(1)
			go func() {
				defer func() { <-r.slots; r.wg.Done() }()
				if err := r.pictures(sec, meta, base, rec, events, s); err != nil {
					r.fail(err)
				}
			}()
		}
	}
	r.rows = append(r.rows, row)
	r.meta = append(r.meta, meta)
	return nil
}

func (r *Report) fail(err error) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.err == nil {
		r.err = err
	}
}

func (r *Report) failed() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.err
}

func (r *Report) class(c string) *classAcc {
	a, ok := r.classes[c]
	if !ok {
		a = &classAcc{}
		r.classes[c] = a
	}
	return a
}

// tables prepares a capture's section of the page: facts, events and
// satellites.
func (r *Report) tables(rec detect.CaptureRecord, events []detect.Event) *section {
	sec := &section{Anchor: fmt.Sprintf("c%04d", r.n), Name: rec.Capture, Facts: facts(rec)}
	for i, e := range events {
		sec.Events = append(sec.Events, eventRowOf(i, e))
	}
	if rec.Stats != nil {
		sats := append([]detect.Satellite(nil), rec.Stats.Satellites...)
		sort.SliceStable(sats, func(a, b int) bool { return sats[a].CN0DBHz > sats[b].CN0DBHz })
		for _, st := range sats {
			sec.Sats = append(sec.Sats, satRow{System: st.System, PRN: fmt.Sprint(st.PRN), CN0: f1(st.CN0DBHz),
				Doppler: fmt.Sprintf("%+.0f", st.DopplerHz), CodePhase: fmt.Sprintf("%.2f", st.CodePhaseChips)})
		}
		sec.GNSSSkipped = rec.Stats.GNSSSkipped
	}
	return sec
}

// pictures draws a capture's pictures into files named base-KIND.png and
// records them in its section and its report.json entry.
func (r *Report) pictures(sec *section, meta *captureMeta, base string, rec detect.CaptureRecord, events []detect.Event, s *Summary) error {
	title := rec.Capture
	if rec.Start != nil && !rec.Start.IsZero() {
		title += "  ·  " + rec.Start.UTC().Format("2006-01-02 15:04:05.000 UTC")
	}
	kinds := []struct {
		suffix, alt, caption string
		w, h                 int
		draw                 func(io.Writer) (Layout, error)
	}{
		{"spectrogram", "spectrogram of " + rec.Capture,
			"Spectrogram: time runs down, frequency across; colour in dBFS per bin; boxes are the events (numbered as in the table).",
			SpectrogramWidth, SpectrogramHeight,
			func(w io.Writer) (Layout, error) { return WriteSpectrogram(w, s, events, "Spectrogram · "+title) }},
		{"psd", "power spectral density of " + rec.Capture,
			"Mean PSD of the capture against the noise reference; shaded: event bands (class colours) and bins the detectors ignore (grey).",
			PSDWidth, PSDHeight,
			func(w io.Writer) (Layout, error) { return WritePSD(w, s, events, "PSD · "+title) }},
		{"sk", "spectral kurtosis of " + rec.Capture,
			"Spectral kurtosis per bin, its mean and its maximum over the blocks; noise alone stays between the thresholds. Where a signal is there in every frame with a steady level (a tone, a chirp faster than a frame) SK falls below the lower one; where it is there in some frames only (pulses, a slow sweep passing, a tone switching on or off inside a block) SK rises above the upper one, in the maximum first.",
			SKWidth, SKHeight,
			func(w io.Writer) (Layout, error) { return WriteSK(w, s, "Spectral kurtosis · "+title) }},
		{"envelope", "power envelope of " + rec.Capture,
			"Power envelope: mean frame power and peak sample power; marks at the top are the detected pulse arrivals (a pulse pair marked once, counted as two pulses, as in the events table).",
			EnvelopeWidth, EnvelopeHeight,
			func(w io.Writer) (Layout, error) { return WriteEnvelope(w, s, "Power envelope · "+title) }},
	}
	for _, k := range kinds {
		file := base + "-" + k.suffix + ".png"
		l, err := r.writePicture(file, k.draw)
		if err != nil {
			var pe pictureError
			if errors.As(err, &pe) {
				sec.Notes = append(sec.Notes, "No "+k.suffix+" picture: "+pe.Error()+".")
				continue
			}
			return err
		}
		l.File = file
		meta.Pictures = append(meta.Pictures, l)
		sec.Pictures = append(sec.Pictures, picture{File: file, Width: k.w, Height: k.h, Alt: k.alt, Caption: k.caption})
	}
	// A spoofing event's satellites: the correlation against code phase
	// with both peaks marked, one picture per PRN.
	for _, e := range events {
		if e.Class != detect.ClassSpoofing {
			continue
		}
		for n, pp := range e.Params.Peaks {
			if n == maxCorrelationPictures {
				sec.Notes = append(sec.Notes, fmt.Sprintf("Correlation pictures of the first %d of %d PRNs only.", n, len(e.Params.Peaks)))
				break
			}
			file := fmt.Sprintf("%s-correlation-prn%02d.png", base, pp.PRN)
			l, err := r.writePicture(file, func(w io.Writer) (Layout, error) {
				return WriteCorrelation(w, pp, fmt.Sprintf("PRN %d · %s · %s", pp.PRN, e.Params.Kind, rec.Capture))
			})
			if err != nil {
				var pe pictureError
				if errors.As(err, &pe) {
					sec.Notes = append(sec.Notes, "No correlation picture for PRN "+fmt.Sprint(pp.PRN)+": "+pe.Error()+".")
					continue
				}
				return err
			}
			l.File = file
			meta.Pictures = append(meta.Pictures, l)
			sec.Pictures = append(sec.Pictures, picture{File: file, Width: CorrelationWidth, Height: CorrelationHeight,
				Alt: fmt.Sprintf("correlation of PRN %d in %s", pp.PRN, rec.Capture),
				Caption: fmt.Sprintf("PRN %d (%s): correlation power against arrival delay from its strongest peak; the marks are the two peaks, the second %+.2f chips and %.1f dB from the first.",
					pp.PRN, e.Params.Kind, pp.DelayChips, pp.SecondDB)})
		}
	}
	return nil
}

// pictureError is a picture that the data cannot make (too short a
// capture for SK, say); the page says so instead of failing.
type pictureError struct{ err error }

func (p pictureError) Error() string { return strings.TrimPrefix(p.err.Error(), "report: ") }

// writePicture draws into dir/file; drawing failures are pictureErrors,
// file failures plain errors.
func (r *Report) writePicture(file string, draw func(io.Writer) (Layout, error)) (Layout, error) {
	var buf bytes.Buffer
	l, err := draw(&buf)
	if err != nil {
		return l, pictureError{err}
	}
	if err := os.WriteFile(filepath.Join(r.dir, file), buf.Bytes(), 0o644); err != nil {
		return l, fmt.Errorf("report: %w", err)
	}
	return l, nil
}

func facts(rec detect.CaptureRecord) []fact {
	var fs []fact
	add := func(k, v string) { fs = append(fs, fact{k, v}) }
	if rec.Start != nil && !rec.Start.IsZero() {
		add("start", rec.Start.UTC().Format("2006-01-02 15:04:05.000 UTC"))
		if rec.TimeSource != "" {
			add("time from", rec.TimeSource)
		}
	} else if rec.Status == detect.StatusOK {
		add("start", "unknown: the capture states no time (no core:datetime); its events have no times")
	}
	if rec.SampleRate > 0 {
		add("duration", fmt.Sprintf("%.3f s", float64(rec.Samples)/rec.SampleRate))
		add("sample rate", fmt.Sprintf("%.6g MS/s", rec.SampleRate/1e6))
	}
	if rec.CenterHz != nil {
		add("centre", MHz(*rec.CenterHz))
	} else {
		add("centre", "unknown")
	}
	if rec.Format != "" {
		add("format", rec.Format)
	}
	add("status", rec.Status)
	if rec.Error != "" {
		add("reason", rec.Error)
	}
	if st := rec.Stats; st != nil {
		add("power", f1(st.PowerDBFS)+" dBFS")
		add("noise floor", f1(st.NoiseFloorDBFS)+" dBFS")
		if v, ok := PowerOverBaseline(st); ok {
			add(PowerOverBaselineWords, signed(v, 2)+" dB")
		}
		add("SK max", fmt.Sprintf("%.3g", st.SKMax))
		add("clipped", fmt.Sprintf("%.3g %%", st.ClipFraction*100))
		add("baseline", st.Baseline)
	}
	if rec.SHA256 != "" {
		add("SHA-256", rec.SHA256)
	}
	return fs
}

func eventRowOf(i int, e detect.Event) eventRow {
	row := eventRow{Label: EventLabel(i, e), Class: e.Class, Start: "–",
		Duration:  fmt.Sprintf("%.1f", float64(e.End.Sub(e.Start.Time))/1e6),
		Offset:    fmt.Sprintf("%+.1f", e.OffsetHz/1e3),
		Absolute:  "–",
		Bandwidth: fmt.Sprintf("%.1f", e.BandwidthHz/1e3),
		JN:        "–", Power: f1(e.PowerDBFS), Loss: "–",
		Detail: Detail(e), Detectors: strings.Join(e.Detectors, ", "), ID: e.ID}
	if !e.Start.IsZero() {
		row.Start = e.Start.UTC().Format("15:04:05.000")
	}
	if e.Start.IsZero() || e.End.IsZero() {
		row.Duration = "–"
	}
	if e.CenterHz != nil {
		row.Absolute = Trim(*e.CenterHz/1e6, 6)
	}
	if jn, ok := JN(e); ok {
		row.JN = f1(jn)
	}
	if l, ok := Loss(e); ok {
		row.Loss = f1(l)
	}
	return row
}

// offAxisNote is the timeline caption's sentence on captures left off its
// time axis (timeline.dropOutliers).
func offAxisNote(n int) string {
	if n == 0 {
		return ""
	}
	return fmt.Sprintf(" %d capture(s) dated far from the others (see each capture's time source) are drawn after the capture before them, not at their time.", n)
}

// PowerOverBaselineWords names stats.power_over_baseline_db (and the
// older agc_deviation_db) the one way the report, the timeline, the
// dashboard and the metrics' help say it (issue 18: it was "floor dev.",
// "noise-floor deviation" and "AGC deviation").
const PowerOverBaselineWords = "in-band power over baseline"

// PowerOverBaseline is the capture's total in-band power over the site
// baseline's in dB (stats.power_over_baseline_db), when a baseline power
// was known; from a log written before that field, agc_deviation_db
// unless the baseline was still being learned (when it read 0).
func PowerOverBaseline(st *detect.Stats) (float64, bool) {
	if st == nil {
		return 0, false
	}
	if st.PowerOverBaselineDB != nil {
		return *st.PowerOverBaselineDB, true
	}
	if st.Baseline == "" || st.Baseline == "learning" {
		return 0, false
	}
	return st.AGCDeviationDB, true
}

// JN is an event's J/N in dB, when it has one: a cn0_drop is a statement
// about the satellites, not an interference, and has none (issue 18; its
// record's jn_db, kept for readers of the log, is not shown as one).
func JN(e detect.Event) (float64, bool) {
	if e.Class == detect.ClassCN0Drop || math.IsNaN(e.JNDB) {
		return 0, false
	}
	return e.JNDB, true
}

// Loss is the C/N0 loss an event stands for: the predicted degradation
// (impact.cn0_degradation_db) or, for a cn0_drop, the measured drop
// (params.drop_db).
func Loss(e detect.Event) (float64, bool) {
	if e.Impact != nil {
		return e.Impact.CN0DegradationDB, true
	}
	if e.Params.DropDB != nil {
		return *e.Params.DropDB, true
	}
	return 0, false
}

// Detail is the class-specific part of an event in words. It tolerates
// missing parameters (records read from a log written by another
// version).
func Detail(e detect.Event) string {
	p := e.Params
	num := func(v *float64, scale float64, format string) string {
		if v == nil {
			return "?"
		}
		return fmt.Sprintf(format, *v*scale)
	}
	switch e.Class {
	case detect.ClassCW:
		s := make([]string, 0, len(p.Tones))
		for _, t := range p.Tones {
			s = append(s, fmt.Sprintf("%+.3f kHz at %.1f dB", t.OffsetHz/1e3, t.JNDB))
		}
		return fmt.Sprintf("%d tone(s): %s", len(p.Tones), strings.Join(s, ", "))
	case detect.ClassSwept:
		rate := "?"
		if p.SweepRateHzPerS != nil {
			rate = SI(*p.SweepRateHzPerS, "Hz/s")
		}
		return fmt.Sprintf("%s sweep, period %s µs, %s … %s MHz, %s", p.Shape, num(p.SweepPeriodS, 1e6, "%.2f"),
			num(p.SweepLowHz, 1e-6, "%+.3f"), num(p.SweepHighHz, 1e-6, "%+.3f"), rate)
	case detect.ClassPulsed:
		n := "?"
		if p.Pulses != nil {
			n = fmt.Sprint(*p.Pulses)
		}
		s := fmt.Sprintf("%s pulses, width %s µs, PRI %s µs, duty %s %%", n, num(p.PulseWidthS, 1e6, "%.2f"),
			num(p.PRIS, 1e6, "%.1f"), num(p.DutyCycle, 100, "%.2f"))
		if p.PairSpacingS != nil {
			s += ", pairs " + num(p.PairSpacingS, 1e6, "%.1f") + " µs apart"
		}
		return s
	case detect.ClassWidebandNoise, detect.ClassNarrowbandNoise:
		return "floor rise " + num(p.FloorRiseDB, 1, "%.2f") + " dB"
	case detect.ClassCN0Drop:
		return fmt.Sprintf("C/N0 %s dB-Hz, %s dB below the baseline %s, PRNs %v", num(p.CN0DBHz, 1, "%.1f"),
			num(p.DropDB, 1, "%.1f"), num(p.BaselineDBHz, 1, "%.1f"), p.PRNs)
	case detect.ClassSpoofing:
		s := fmt.Sprintf("%s, PRNs %v, %s dB over the authentic signals", p.Kind, p.PRNs, num(p.PowerOverAuthenticDB, 1, "%.1f"))
		if p.DelayChips != nil {
			s += ", delay " + num(p.DelayChips, 1, "%.3f") + " chips"
		}
		keys := make([]string, 0, len(p.Indicators))
		for k := range p.Indicators {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		for i, k := range keys {
			sep := "; "
			if i > 0 {
				sep = ", "
			}
			s += sep + k + " " + strconv.FormatFloat(p.Indicators[k], 'g', 4, 64)
		}
		return s
	}
	return ""
}

func f1(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	return noNegZero(fmt.Sprintf("%.1f", v))
}

func signed(v float64, prec int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	return noNegZero(fmt.Sprintf("%+.*f", prec, v))
}

// slug makes a capture name into a file-name part: letters, digits, '.',
// '-' and '_' only, without the SigMF extension, at most 60 bytes.
func slug(name string) string {
	name = strings.TrimSuffix(strings.TrimSuffix(name, ingest.MetaExt), ingest.DataExt)
	var b strings.Builder
	for _, r := range name {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '.', r == '-', r == '_':
			b.WriteRune(r)
		default:
			b.WriteByte('_')
		}
		if b.Len() >= 60 {
			break
		}
	}
	s := strings.Trim(b.String(), ".")
	if s == "" {
		s = "capture"
	}
	return s
}

func classSlug(c string) string { return strings.ReplaceAll(slug(c), ".", "_") }

// interval is a stretch of interference time, Unix nanoseconds.
type interval struct{ lo, hi int64 }

// classAcc accumulates the summary of one class (or of all).
type classAcc struct {
	n            int
	spans        []interval
	untimed      time.Duration // events without times: their sample count over the rate
	worstJN      float64
	worstLoss    float64
	hasLoss      bool
	first, last  time.Time
	hasJN, timed bool
}

func (a *classAcc) add(e detect.Event, rate float64) {
	if a.n == 0 {
		a.worstJN = math.Inf(-1)
	}
	a.n++
	if jn, ok := JN(e); ok {
		a.worstJN, a.hasJN = math.Max(a.worstJN, jn), true
	}
	if l, ok := Loss(e); ok {
		if !a.hasLoss || l > a.worstLoss {
			a.worstLoss = l
		}
		a.hasLoss = true
	}
	if !e.Start.IsZero() && !e.End.IsZero() {
		a.spans = append(a.spans, interval{e.Start.UnixNano(), e.End.UnixNano()})
		if !a.timed || e.Start.Before(a.first) {
			a.first = e.Start.Time
		}
		if !a.timed || e.End.After(a.last) {
			a.last = e.End.Time
		}
		a.timed = true
	} else if rate > 0 {
		a.untimed += time.Duration(float64(e.SampleCount) / rate * 1e9)
	}
}

// total is the length of the union of the intervals plus the untimed
// durations: overlapping events (a cn0_drop over the interference that
// explains it) count once.
func (a *classAcc) total() time.Duration {
	s := append([]interval(nil), a.spans...)
	sort.Slice(s, func(i, j int) bool { return s[i].lo < s[j].lo })
	var sum int64
	var cur interval
	open := false
	for _, iv := range s {
		if !open || iv.lo > cur.hi {
			if open {
				sum += cur.hi - cur.lo
			}
			cur, open = iv, true
			continue
		}
		cur.hi = max(cur.hi, iv.hi)
	}
	if open {
		sum += cur.hi - cur.lo
	}
	return time.Duration(sum) + a.untimed
}

// summaryRow is one line of the page's summary table.
type summaryRow struct {
	Class, Events, Total, WorstJN, WorstLoss, First, Last string
	All                                                   bool
}

func (a *classAcc) row(class string) summaryRow {
	r := summaryRow{Class: class, Events: fmt.Sprint(a.n), Total: duration(a.total()), WorstJN: "–",
		WorstLoss: "–", First: "–", Last: "–"}
	if a.hasJN {
		r.WorstJN = f1(a.worstJN)
	}
	if a.hasLoss {
		r.WorstLoss = f1(a.worstLoss)
	}
	if a.timed {
		r.First = a.first.UTC().Format("2006-01-02 15:04:05")
		r.Last = a.last.UTC().Format("2006-01-02 15:04:05")
	}
	return r
}

func duration(d time.Duration) string {
	switch {
	case d >= time.Hour:
		return fmt.Sprintf("%.2f h", d.Hours())
	case d >= time.Minute:
		return fmt.Sprintf("%.1f min", d.Minutes())
	default:
		return fmt.Sprintf("%.3f s", d.Seconds())
	}
}

// page is the template's data.
type page struct {
	Title, Source, Generator string
	CSP                      string
	CSS                      template.CSS
	Script                   template.JS
	Captures, Analysed       int
	Quarantined, Events      int
	WithSections             int
	Summary                  []summaryRow
	Timeline                 picture
	Quar                     []quarRow
	Rows                     []captureRow
	Sections                 []*section
	Classes                  []legendRow
}

type legendRow struct{ Class, Slug string }

// Close waits for the pictures, draws the site timeline and writes
// index.html and report.json.
func (r *Report) Close() error {
	r.wg.Wait()
	if err := r.failed(); err != nil {
		return err
	}
	var buf bytes.Buffer
	l, err := r.tl.write(&buf)
	if err != nil {
		return err
	}
	const tlFile = "timeline.png"
	if err := os.WriteFile(filepath.Join(r.dir, tlFile), buf.Bytes(), 0o644); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	l.File = tlFile

	css, err := assets.ReadFile("page.css")
	if err != nil {
		return fmt.Errorf("report: %w", err)
	}
	var cb strings.Builder
	cb.Write(css)
	for _, c := range append(append([]string(nil), detect.Classes...), "other") {
		k := ClassColor(c)
		fmt.Fprintf(&cb, ".cls-%s{background:#%02x%02x%02x}\n", classSlug(c), k.R, k.G, k.B)
	}
	script, err := assets.ReadFile("check.js")
	if err != nil {
		return fmt.Errorf("report: %w", err)
	}
	p := page{Title: r.opts.Title, Source: r.opts.Source, Generator: "quietband " + detect.Version,
		CSS: template.CSS(cb.String()), Script: template.JS(script),
		Captures: r.n, Quarantined: len(r.quar), Events: r.all.n, WithSections: len(r.sections),
		Timeline: picture{File: tlFile, Width: TimelineWidth, Height: TimelineHeight, Alt: "site timeline",
			Caption: "Events by class, J/N, C/N0 of the strongest four satellites and the in-band power over the baseline, per capture; dashed lines mark quarantined captures." + offAxisNote(r.tl.offAxis)},
		Quar: r.quar, Rows: r.rows, Sections: r.sections}
	p.Analysed = p.Captures - p.Quarantined
	p.CSP = "default-src 'none'; img-src 'self'; style-src '" + cspHash(cb.String()) + "'; script-src '" + cspHash(string(script)) + "'; base-uri 'none'; form-action 'none'"
	for _, c := range detect.Classes {
		if a, ok := r.classes[c]; ok {
			p.Summary = append(p.Summary, a.row(c))
		}
	}
	var other []string
	for c := range r.classes {
		if !isKnownClass(c) {
			other = append(other, c)
		}
	}
	sort.Strings(other)
	for _, c := range other {
		p.Summary = append(p.Summary, r.classes[c].row(c))
	}
	if r.all.n > 0 {
		all := r.all.row("all classes")
		all.All = true
		p.Summary = append(p.Summary, all)
	}
	for _, c := range detect.Classes {
		p.Classes = append(p.Classes, legendRow{Class: c, Slug: classSlug(c)})
	}
	var page bytes.Buffer
	if err := pageTemplate.Execute(&page, p); err != nil {
		return fmt.Errorf("report: page: %w", err)
	}
	if err := ingest.WriteFileAtomic(filepath.Join(r.dir, "index.html"), page.Bytes()); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	doc := struct {
		Generator string         `json:"generator"`
		Timeline  Layout         `json:"timeline"`
		Captures  []*captureMeta `json:"captures"`
	}{p.Generator, l, r.meta}
	js, err := json.MarshalIndent(doc, "", "  ")
	if err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return ingest.WriteFileAtomic(filepath.Join(r.dir, "report.json"), append(js, '\n'))
}

// cspHash is a Content-Security-Policy source expression allowing exactly
// the inline element whose text is s (CSP Level 3, hash-source).
func cspHash(s string) string {
	h := sha256.Sum256([]byte(s))
	return "sha256-" + base64.StdEncoding.EncodeToString(h[:])
}

func isKnownClass(c string) bool {
	for _, k := range detect.Classes {
		if k == c {
			return true
		}
	}
	return false
}
