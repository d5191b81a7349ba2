package metrics

import (
	"math"
	"slices"
	"strconv"
	"time"

	"quietband/detect"
)

// Capture is the outcome of one capture, for ObserveCapture.
type Capture struct {
	Input string
	// Record is the capture record written to the event log.
	Record detect.CaptureRecord
	// Events are the events the analysis found; those open at the end of
	// the capture (detect.Event.OpenAtEnd) are active.
	Events   []detect.Event
	Bytes    int64         // size of the data file
	Duration time.Duration // signal length
	Elapsed  time.Duration // analysis time
	// Satellites tells that satellites were measured (a GNSS meter ran on
	// the capture), so that Record.Stats.Satellites, even empty, is a
	// measurement.
	Satellites bool
	// At is when the analysis finished (wall clock).
	At time.Time
}

// ObserveCapture updates the metrics with an analysed or quarantined
// capture.
func (s *Set) ObserveCapture(c Capture) {
	if c.Record.Status != detect.StatusOK {
		s.captures.WithLabelValues(ResultQuarantined).Inc()
		return
	}
	s.captures.WithLabelValues(ResultOK).Inc()
	for _, e := range c.Events {
		s.events.WithLabelValues(e.Class).Inc()
		s.inputEvents.WithLabelValues(c.Input, e.Class).Inc()
	}
	s.samples.Add(float64(c.Record.Samples))
	s.bytes.Add(float64(c.Bytes))
	s.processing.Observe(c.Elapsed.Seconds())
	if c.Elapsed > 0 {
		s.realtime.Set(c.Duration.Seconds() / c.Elapsed.Seconds())
	}
	s.setLive(c)
	s.receiver.observe(c.Input, c.Record, true)
}

// Restore sets the live state (the gauges, not the counters) of an input
// from its latest analysed capture as the event log holds it (see
// LastCaptures), so that a restarted daemon shows what was active, the
// time of the last capture and the satellites as they were when it
// stopped, instead of zeros until the next capture. A quarantined record
// changes nothing, as in ObserveCapture.
func (s *Set) Restore(c Capture) {
	if c.Record.Status != detect.StatusOK {
		return
	}
	s.setLive(c)
	s.receiver.observe(c.Input, c.Record, false)
}

// setLive sets the gauges that describe an input's latest analysed
// capture.
func (s *Set) setLive(c Capture) {
	s.mu.Lock()
	if c.At.After(s.lastAt) {
		s.lastAt = c.At
		s.lastCapture.Set(float64(c.At.UnixNano()) / 1e9)
	}
	s.mu.Unlock()
	if c.Record.Start != nil {
		s.startTime.WithLabelValues(c.Input).Set(float64(c.Record.Start.UnixNano()) / 1e9)
	}

	// Events of emitters the site lists as known are logged as always and
	// raise no alert: they count in known_emitter_active, not in
	// interference_active.
	var news, known []detect.Event
	for _, e := range c.Events {
		if e.Known {
			known = append(known, e)
		} else {
			news = append(news, e)
		}
	}
	knownOpen := openAtEnd(known)
	for _, class := range detect.Classes {
		_, ok := knownOpen[class]
		s.knownActive.WithLabelValues(c.Input, class).Set(b2f(ok))
	}
	open := openAtEnd(news)
	// A C/N0 drop is a statement about the satellites, not interference
	// (issue 18): cn0_drop_active says it; interference_active's cn0_drop
	// series stays, at 0, for its readers.
	delete(open, detect.ClassCN0Drop)
	s.observeCN0Drop(c.Input, c.Events)
	for _, class := range detect.Classes {
		jn, ok := open[class]
		s.active.WithLabelValues(c.Input, class).Set(b2f(ok))
		if ok {
			s.jn.WithLabelValues(c.Input, class).Set(jn)
		} else {
			s.jn.DeleteLabelValues(c.Input, class)
		}
	}
	for class, jn := range open {
		if !slices.Contains(detect.Classes, class) {
			// A class newer than this list: still bounded (classes are
			// only ever added by a code change).
			s.active.WithLabelValues(c.Input, class).Set(1)
			s.jn.WithLabelValues(c.Input, class).Set(jn)
		}
	}

	s.observeSpoofing(c.Input, c.Events)
	if st := c.Record.Stats; st != nil {
		s.power.WithLabelValues(c.Input).Set(st.PowerDBFS)
		s.noiseFloor.WithLabelValues(c.Input).Set(st.NoiseFloorDBFS)
		s.agc.WithLabelValues(c.Input).Set(st.AGCDeviationDB)
		if v := st.PowerOverBaselineDB; v != nil {
			s.overBase.WithLabelValues(c.Input).Set(*v)
		} else {
			s.overBase.DeleteLabelValues(c.Input)
		}
		s.skMax.WithLabelValues(c.Input).Set(st.SKMax)
		s.clip.WithLabelValues(c.Input).Set(st.ClipFraction)
		if c.Satellites && st.GNSSSkipped == "" {
			s.observeSatellites(c.Input, st.Satellites)
		}
	}
}

// observeSatellites sets the C/N0 series of an input to the satellites of
// its latest capture, removing PRNs no longer acquired.
func (s *Set) observeSatellites(input string, sats []detect.Satellite) {
	s.mu.Lock()
	defer s.mu.Unlock()
	now := map[int]bool{}
	for _, sat := range sats {
		s.cn0.WithLabelValues(input, strconv.Itoa(sat.PRN)).Set(sat.CN0DBHz)
		now[sat.PRN] = true
	}
	for prn := range s.prns[input] {
		if !now[prn] {
			s.cn0.DeleteLabelValues(input, strconv.Itoa(prn))
		}
	}
	s.prns[input] = now
	s.satellites.WithLabelValues(input).Set(float64(len(sats)))
	if m := detect.StrongestMean(sats, detect.Strongest); !math.IsNaN(m) {
		s.cn0Mean.WithLabelValues(input).Set(m)
	} else {
		s.cn0Mean.DeleteLabelValues(input)
	}
}

// openAtEnd returns, by class, the largest J/N of the events open at the
// end of their capture (detect.Event.OpenAtEnd, the pipeline's).
func openAtEnd(events []detect.Event) map[string]float64 {
	out := map[string]float64{}
	for _, e := range events {
		if !e.OpenAtEnd {
			continue
		}
		if jn, ok := out[e.Class]; !ok || e.JNDB > jn {
			out[e.Class] = e.JNDB
		}
	}
	return out
}

// NoExplanation is cn0_drop_active's explained_by for a C/N0 drop that no
// interference of the capture explains: the satellite signal is degraded
// (obstruction, antenna, cable).
const NoExplanation = "none"

// CN0DropCauses are the values of cn0_drop_active's explained_by label:
// none and every interference class.
func CN0DropCauses() []string {
	out := []string{NoExplanation}
	for _, c := range detect.Classes {
		if c != detect.ClassCN0Drop {
			out = append(out, c)
		}
	}
	return out
}

// observeCN0Drop sets the C/N0-drop series of an input from the events of
// its latest analysed capture: its drop and what explains it, the class
// of the strongest (largest J/N) event the drop is linked to (Related) or
// none.
func (s *Set) observeCN0Drop(input string, events []detect.Event) {
	var drop *detect.Event
	for i := range events {
		if events[i].Class == detect.ClassCN0Drop && events[i].OpenAtEnd {
			drop = &events[i]
			break
		}
	}
	cause := ""
	if drop != nil {
		cause = NoExplanation
		best := math.Inf(-1)
		for _, e := range events {
			if e.Class != detect.ClassCN0Drop && slices.Contains(drop.Related, e.ID) && e.JNDB > best {
				cause, best = e.Class, e.JNDB
			}
		}
	}
	for _, c := range CN0DropCauses() {
		s.cn0DropActive.WithLabelValues(input, c).Set(b2f(c == cause))
	}
	if cause != "" && !slices.Contains(CN0DropCauses(), cause) {
		s.cn0DropActive.WithLabelValues(input, cause).Set(1)
	}
	if drop != nil && drop.Params.DropDB != nil {
		s.cn0DropDB.WithLabelValues(input).Set(*drop.Params.DropDB)
	} else {
		s.cn0DropDB.DeleteLabelValues(input)
	}
}

// SpoofingKinds are the kinds of a spoofing event (params.kind), the
// values of quietband_spoofing_active's kind label.
var SpoofingKinds = []string{"counterfeit", "meaconing"}

// chipRate is the C/A chip rate, 1.023 MHz (IS-GPS-200): a meacon's
// delay in chips over it is seconds.
const chipRate = 1.023e6

// observeSpoofing sets the spoofing series of an input from the events
// of its latest analysed capture: a spoofing event (there is at most one
// per capture) sets its kind active, the number of its PRNs, its power
// over the authentic signals and, for a meacon, its delay; a capture
// without one clears them.
func (s *Set) observeSpoofing(input string, events []detect.Event) {
	var ev *detect.Event
	for i := range events {
		if events[i].Class == detect.ClassSpoofing {
			ev = &events[i]
			break
		}
	}
	kind := ""
	if ev != nil {
		kind = ev.Params.Kind
	}
	for _, k := range SpoofingKinds {
		s.spoofActive.WithLabelValues(input, k).Set(b2f(k == kind))
	}
	if ev != nil && !slices.Contains(SpoofingKinds, kind) {
		// A kind newer than this list: still bounded (kinds are only
		// ever added by a code change).
		s.spoofActive.WithLabelValues(input, kind).Set(1)
	}
	if ev == nil {
		s.spoofPRNs.WithLabelValues(input).Set(0)
		s.spoofOver.DeleteLabelValues(input)
		s.spoofDelay.DeleteLabelValues(input)
		return
	}
	s.spoofPRNs.WithLabelValues(input).Set(float64(len(ev.Params.PRNs)))
	if v := ev.Params.PowerOverAuthenticDB; v != nil {
		s.spoofOver.WithLabelValues(input).Set(*v)
	} else {
		s.spoofOver.DeleteLabelValues(input)
	}
	if d := ev.Params.DelayChips; d != nil {
		s.spoofDelay.WithLabelValues(input).Set(*d / chipRate)
	} else {
		s.spoofDelay.DeleteLabelValues(input)
	}
}
