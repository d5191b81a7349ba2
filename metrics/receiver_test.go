package metrics

import (
	"testing"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/detect"
)

// TestReceiverSeries: the recorder's front-end fault, clock offset and
// orientation follow the input's latest analysed capture (issue 14, Build
// 6: "a capture-level fault in the record and a metric"); a capture that
// did not measure them makes the clock and orientation series absent
// rather than keep a stale value; Restore sets the live series without
// counting; the series pass promlint (the linter of promtool check
// metrics).
func TestReceiverSeries(t *testing.T) {
	s := New(Options{Inputs: []string{"roof"}})
	clock, inv := 222.5, true
	faulty := detect.CaptureRecord{Status: detect.StatusOK, Fault: &detect.Fault{Kind: detect.FaultGap, Detail: "a run of zeros"},
		Stats: &detect.Stats{ClockOffsetHz: &clock, SpectrumInverted: &inv}}
	s.ObserveCapture(Capture{Input: "roof", Record: faulty})
	r := s.receiver
	if g, n := testutil.ToFloat64(r.fault.WithLabelValues("roof", detect.FaultGap)), testutil.ToFloat64(r.faults.WithLabelValues("roof", detect.FaultGap)); g != 1 || n != 1 {
		t.Errorf("gap: fault %v, total %v; want 1, 1", g, n)
	}
	if v := testutil.ToFloat64(r.fault.WithLabelValues("roof", detect.FaultDead)); v != 0 {
		t.Errorf("dead: %v, want 0", v)
	}
	if c, i := testutil.ToFloat64(r.clock.WithLabelValues("roof")), testutil.ToFloat64(r.inverted.WithLabelValues("roof")); c != 222.5 || i != 1 {
		t.Errorf("clock %v, inverted %v", c, i)
	}
	s.ObserveCapture(Capture{Input: "roof", Record: detect.CaptureRecord{Status: detect.StatusOK, Stats: &detect.Stats{}}})
	if g := testutil.ToFloat64(r.fault.WithLabelValues("roof", detect.FaultGap)); g != 0 {
		t.Errorf("gap after a clean capture: %v, want 0", g)
	}
	if n := testutil.CollectAndCount(r.clock) + testutil.CollectAndCount(r.inverted); n != 0 {
		t.Errorf("%d clock or orientation series after a capture that measured neither, want none", n)
	}
	s.Restore(Capture{Input: "roof", Record: faulty})
	if g, n := testutil.ToFloat64(r.fault.WithLabelValues("roof", detect.FaultGap)), testutil.ToFloat64(r.faults.WithLabelValues("roof", detect.FaultGap)); g != 1 || n != 1 {
		t.Errorf("restored: fault %v, total %v; want 1 and still 1", g, n)
	}
	problems, err := testutil.GatherAndLint(s.Registry(), "quietband_front_end_fault", "quietband_front_end_faults_total",
		"quietband_receiver_clock_offset_hz", "quietband_spectrum_inverted")
	if err != nil || len(problems) > 0 {
		t.Errorf("promlint: %v %+v", err, problems)
	}
}
