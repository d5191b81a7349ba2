package detect

// Issue 14 ("Real recorders ..."), what the capture record must say:
// the two real recordings as records (inversion and clock offset stated,
// quantization and the occupancy-based level, the real IF's rates, the
// sample drop as a fault, what was not measured), and front-end faults
// (dead, stuck, a zero-filled gap, unnormalised floats) as a fault with a
// note, never a cn0_drop and never learned into the site baseline.

import (
	"context"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"quietband/ingest"
	"quietband/ingest/synth"
)

// TestIssue14RealRecordingRecords: both files of testdata/realdata
// (their README: a real 2-bit front end, BSD 2-clause) through the
// pipeline with the satellites measured, as a site's first capture. The
// 4 MS/s file's record states the inversion (spectrum_inverted true, the
// README: "its spectrum is inverted relative to the notes"), a clock
// offset within 20 Hz (issue 14's bound) of the median of the README's
// upright Dopplers of the PRNs it reports (ClockOffset's statistic), the
// 2-bit levels ±1, ±3 (README) and an occupancy-based level, no fault and
// no note of an undetermined orientation. The 12 MS/s file's record
// gives the file's rate and samples (12 MS/s, 1 200 000: README), the
// analysed rate 6 MS/s, the IF 3 MHz and the low-side LO (README), the
// sample drop near 87 ms (README) as a gap fault naming its file sample,
// the satellites as acquired with the note that says the capture is too
// short to track, and no cn0 learning (a second capture of the same
// site has no C/N0 baseline).
func TestIssue14RealRecordingRecords(t *testing.T) {
	dir := filepath.Join("..", "testdata", "realdata")
	t.Run("4MHz", func(t *testing.T) {
		c, err := ingest.Open(filepath.Join(dir, realFile), realSettings)
		if err != nil {
			t.Fatal(err)
		}
		res, err := realPipeline(NewState()).Process(context.Background(), c, realFile)
		if err != nil {
			t.Fatal(err)
		}
		rec := res.Record
		st := rec.Stats
		if st.SpectrumInverted == nil || !*st.SpectrumInverted {
			t.Errorf("spectrum_inverted %v, want true", st.SpectrumInverted)
		}
		var dops []float64
		for _, s := range st.Satellites {
			i := slices.IndexFunc(real4MHz, func(w realSat) bool { return w.prn == s.PRN })
			if i < 0 {
				t.Errorf("PRN %d is not in the README's table", s.PRN)
				continue
			}
			dops = append(dops, real4MHz[i].doppler)
		}
		slices.Sort(dops)
		med := dops[len(dops)/2]
		if len(dops)%2 == 0 {
			med = (dops[len(dops)/2-1] + dops[len(dops)/2]) / 2
		}
		if st.ClockOffsetHz == nil || math.Abs(*st.ClockOffsetHz-med) > 20 {
			t.Errorf("clock_offset_hz %v, median README Doppler of the PRNs reported %.1f Hz", st.ClockOffsetHz, med)
		} else {
			t.Logf("clock_offset_hz %.1f Hz, README median %.1f Hz over %d PRNs", *st.ClockOffsetHz, med, len(dops))
		}
		if st.Quantization != "2-bit: levels ±1, ±3" || st.OccupancyLevelDB == nil {
			t.Errorf("quantization %q, occupancy level %v", st.Quantization, st.OccupancyLevelDB)
		}
		if rec.Fault != nil {
			t.Errorf("fault %+v on a clean recording", rec.Fault)
		}
		for _, n := range rec.Notes {
			if strings.Contains(n, "orientation not determined") || strings.Contains(n, "too short") {
				t.Errorf("note %q", n)
			}
		}
		t.Logf("record: %d satellites, inverted %v, notes %q", len(st.Satellites), *st.SpectrumInverted, rec.Notes)
	})
	t.Run("12MHz IF", func(t *testing.T) {
		const file = "L1_20211125_004000_12MHz_I.bin"
		c, err := ingest.Open(filepath.Join(dir, file), ingest.RawSettings{Format: ingest.RI8, SampleRate: 12e6,
			CenterHz: 1575.42e6, HasCenter: true, IFHz: 3e6, LOSide: ingest.LowSide})
		if err != nil {
			t.Fatal(err)
		}
		st := NewState()
		p := realPipeline(st)
		res, err := p.Process(context.Background(), c, file)
		if err != nil {
			t.Fatal(err)
		}
		rec := res.Record
		if rec.SampleRate != 12e6 || rec.Samples != 1200000 || rec.AnalysisRateHz == nil || *rec.AnalysisRateHz != 6e6 ||
			rec.IFHz == nil || *rec.IFHz != 3e6 || rec.LOSide != "low" || rec.Format != "ri8" {
			t.Errorf("record rates: file %g, samples %d, analysed %v, IF %v, LO %q, format %q",
				rec.SampleRate, rec.Samples, rec.AnalysisRateHz, rec.IFHz, rec.LOSide, rec.Format)
		}
		if rec.Fault == nil || rec.Fault.Kind != FaultGap || !strings.Contains(rec.Fault.Detail, "sample drop") {
			t.Errorf("fault %+v, want the sample drop as a gap", rec.Fault)
		} else {
			t.Logf("fault: %s", rec.Fault.Detail)
		}
		if !slices.ContainsFunc(rec.Notes, func(n string) bool { return strings.Contains(n, "too short to track") }) {
			t.Errorf("notes %q lack what was not measured", rec.Notes)
		}
		if len(rec.Stats.Satellites) != len(real12MHz) {
			t.Errorf("%d satellites, the README lists %d", len(rec.Stats.Satellites), len(real12MHz))
		}
		for _, s := range rec.Stats.Satellites {
			if s.Method != MethodAcquired {
				t.Errorf("PRN %d method %q, want acquired", s.PRN, s.Method)
			}
		}
		if inv := rec.Stats.SpectrumInverted; inv == nil || *inv {
			t.Errorf("spectrum_inverted %v, want false (low-side LO)", inv)
		}
		center, _ := c.CenterHz()
		if b := st.Baselines.snapshot(BaselineKey(c.Format.String(), c.SampleRate, center, true, DefaultFFTSize(c.SampleRate))); len(b.CN0) != 0 {
			t.Errorf("C/N0 learned from a capture too short to track: %v", b.CN0)
		}
		t.Logf("notes %q", rec.Notes)
	})
}

// TestIssue14FaultRecords: a site (cf32_le at 4 MS/s, six satellites at
// 40–48 dB-Hz, as synth writes them) learns its baseline from three
// clean captures; then its recorder fails: all zeros (dead), one
// constant value (stuck), 20 ms zero-filled (gap), ADC codes written
// as floats 300 times full scale (unnormalised: issue 14's real case
// read as +48 dBFS with clip fraction 1.0). Each record carries the
// fault of that kind with ingest's detail, a dead or stuck one a note
// that no interference analysis ran (and no note of mitigated
// interference or of satellites lost), an unnormalised one no
// wideband_noise and no power over the site's from its level, with a
// note; none raises a cn0_drop or says
// "no interference" of what was not analysed (a dead or stuck capture
// has no events); the site's baseline (passband, power and C/N0) is
// the same after them as before (never learned from a fault); and a
// clean capture afterwards is analysed against it as before (no event).
func TestIssue14FaultRecords(t *testing.T) {
	sky := []synth.Satellite{
		{PRN: 3, CN0DBHz: 48, DopplerHz: 1800, CodePhaseChips: 77.5},
		{PRN: 11, CN0DBHz: 46, DopplerHz: -3100, CodePhaseChips: 512},
		{PRN: 14, CN0DBHz: 45, DopplerHz: 650, CodePhaseChips: 901.25},
		{PRN: 22, CN0DBHz: 43, DopplerHz: -1200, CodePhaseChips: 300},
		{PRN: 27, CN0DBHz: 41, DopplerHz: 2900, CodePhaseChips: 45},
		{PRN: 30, CN0DBHz: 40, DopplerHz: -400, CodePhaseChips: 640.75},
	}
	yes := true
	scale := 300.0
	fault := func(name string, off float64, fe synth.FrontEnd) synth.Capture {
		return synth.Capture{Name: name, DurationS: 0.25, OffsetS: off, FrontEnd: &fe}
	}
	s := synth.Scenario{Name: "faults", Site: "issue14", Format: "cf32_le", SampleRate: 4e6, CenterHz: 1575.42e6,
		NoiseDBFS: -30, Seed: 1412, Sky: sky, Start: time.Date(2024, 6, 1, 6, 0, 0, 0, time.UTC),
		Captures: []synth.Capture{
			{Name: "clean1", DurationS: 0.25}, {Name: "clean2", DurationS: 0.25, OffsetS: 60}, {Name: "clean3", DurationS: 0.25, OffsetS: 120},
			fault("dead", 180, synth.FrontEnd{Dead: &yes}),
			fault("stuck", 240, synth.FrontEnd{Stuck: &synth.IQValue{I: 0.1, Q: -0.05}}),
			fault("gap", 300, synth.FrontEnd{Gaps: []synth.Gap{{AtS: 0.1, Samples: 80000}}}),
			fault("unnormalised", 360, synth.FrontEnd{UnnormalisedScale: &scale}),
			{Name: "clean4", DurationS: 0.25, OffsetS: 420},
		}}
	st := NewState()
	p := realPipeline(st)
	key := BaselineKey("cf32_le", 4e6, 1575.42e6, true, DefaultFFTSize(4e6))
	want := map[string]string{"dead": FaultDead, "stuck": FaultStuck, "gap": FaultGap, "unnormalised": FaultUnnormalised}
	says := map[string][]string{"dead": {"exactly zero"}, "stuck": {"same value"}, "gap": {"exact zeros", "samples 400000–479999"},
		"unnormalised": {"integer codes stored as floats"}}
	truths, res := processWith(t, s, p)
	var before Baseline
	for i, r := range res {
		name := strings.TrimSuffix(truths[i].Capture, ingest.MetaExt)
		rec := r.Record
		t.Logf("%s: %d events, fault %+v, clip %.3f, power %.1f dBFS, %d satellites, notes %q",
			name, len(r.Events), rec.Fault, rec.Stats.ClipFraction, rec.Stats.PowerDBFS, len(rec.Stats.Satellites), rec.Notes)
		if i == 2 {
			before = cloneBaseline(st.Baselines.snapshot(key))
			if len(before.PSD) == 0 || len(before.CN0) == 0 {
				t.Fatalf("no baseline after three clean captures: %+v", before)
			}
		}
		kind, isFault := want[name]
		if !isFault {
			if rec.Fault != nil || len(r.Events) != 0 {
				t.Errorf("%s: fault %+v, %d events on a clean capture", name, rec.Fault, len(r.Events))
			}
			continue
		}
		if rec.Fault == nil || rec.Fault.Kind != kind {
			t.Errorf("%s: fault %+v, want %s", name, rec.Fault, kind)
			continue
		}
		for _, w := range says[name] {
			if !strings.Contains(rec.Fault.Detail, w) {
				t.Errorf("%s: fault detail %q does not say %q", name, rec.Fault.Detail, w)
			}
		}
		for _, e := range r.Events {
			if e.Class == ClassCN0Drop {
				t.Errorf("%s: cn0_drop from a front-end fault: %+v", name, e.Params)
			}
		}
		if kind == FaultDead || kind == FaultStuck {
			if len(r.Events) != 0 || !slices.ContainsFunc(rec.Notes, func(n string) bool { return strings.HasPrefix(n, "no interference analysis") }) {
				t.Errorf("%s: %d events, notes %q; want none and the note", name, len(r.Events), rec.Notes)
			}
			// What the meter saw of a front end that delivered no
			// signal is not interference nor lost satellites.
			for _, n := range rec.Notes {
				if strings.Contains(n, "interference mitigation") || strings.Contains(n, "lost, not absent") {
					t.Errorf("%s: note %q on a capture without signal", name, n)
				}
			}
		}
		// A level the converter's scaling explains is not a floor
		// rise: dBFS figures of an unnormalised capture are off
		// (ingest's detail says so), so no wideband_noise.
		for _, e := range r.Events {
			if kind == FaultUnnormalised && e.Class == ClassWidebandNoise {
				t.Errorf("%s: wideband_noise at J/N %.1f dB from the converter's scaling", name, e.JNDB)
			}
		}
		if kind == FaultUnnormalised && (rec.Stats.PowerOverBaselineDB != nil ||
			!slices.ContainsFunc(rec.Notes, func(n string) bool { return strings.Contains(n, "unnormalised") })) {
			t.Errorf("%s: power over the site's %v, notes %q; want none and a note", name, rec.Stats.PowerOverBaselineDB, rec.Notes)
		}
		after := st.Baselines.snapshot(key)
		if !sameBaseline(before, after) {
			t.Errorf("%s: the baseline changed (captures %d → %d, C/N0 samples %d → %d)", name, before.Captures, after.Captures, before.CN0Samples, after.CN0Samples)
		}
	}
}

// cloneBaseline copies b's slices and maps.
func cloneBaseline(b Baseline) Baseline {
	b.PSD = slices.Clone(b.PSD)
	cn0 := map[int]float64{}
	for k, v := range b.CN0 {
		cn0[k] = v
	}
	b.CN0 = cn0
	return b
}

// sameBaseline reports whether two baselines hold the same passband,
// power and C/N0.
func sameBaseline(a, b Baseline) bool {
	if a.Captures != b.Captures || a.CN0Samples != b.CN0Samples || a.Power != b.Power || a.CN0Mean != b.CN0Mean ||
		!slices.Equal(a.PSD, b.PSD) || len(a.CN0) != len(b.CN0) {
		return false
	}
	for k, v := range a.CN0 {
		if b.CN0[k] != v {
			return false
		}
	}
	return true
}
