package metrics

import (
	"github.com/prometheus/client_golang/prometheus"

	"quietband/detect"
)

// FrontEndFaults are the front-end fault kinds of capture records
// (detect.Fault): the values of the kind label.
var FrontEndFaults = []string{detect.FaultDead, detect.FaultStuck, detect.FaultGap, detect.FaultUnnormalised}

// receiver is what the latest capture says of an input's recorder rather
// than of the sky (issue 14): its front-end fault, its clock offset, its
// spectrum orientation.
//
//	quietband_front_end_fault{input,kind}          1 while the latest analysed capture has the fault, else 0
//	quietband_front_end_faults_total{input,kind}   analysed captures with the fault
//	quietband_receiver_clock_offset_hz{input}      the satellites' common Doppler offset; absent when not measured
//	quietband_spectrum_inverted{input}             1 inverted (found or set), 0 upright; absent when not known
type receiver struct {
	fault, clock, inverted *prometheus.GaugeVec
	faults                 *prometheus.CounterVec
}

// registerReceiver adds the receiver's series; each input's fault series
// start at 0.
func (s *Set) registerReceiver(opt Options) {
	r := &receiver{
		fault: prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: Namespace, Name: "front_end_fault",
			Help: "1 while the input's latest analysed capture has the front-end fault (dead: every sample zero; stuck: one value; gap: a run of zeros or a sample drop; unnormalised: float samples far beyond full scale), else 0: the recorder, not the sky, explains the samples."},
			[]string{"input", "kind"}),
		faults: prometheus.NewCounterVec(prometheus.CounterOpts{Namespace: Namespace, Name: "front_end_faults_total",
			Help: "Analysed captures with a front-end fault, by input and kind."}, []string{"input", "kind"}),
		clock: prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: Namespace, Name: "receiver_clock_offset_hz",
			Help: "Receiver clock offset at L1 seen in the input's latest analysed capture: the common Doppler offset of its satellites, Hz; absent when no satellite measured it."},
			[]string{"input"}),
		inverted: prometheus.NewGaugeVec(prometheus.GaugeOpts{Namespace: Namespace, Name: "spectrum_inverted",
			Help: "1 when the input's latest analysed capture has its spectrum inverted (I and Q swapped: found from the satellites or set by the input's configuration), 0 upright; absent when not known."},
			[]string{"input"}),
	}
	s.reg.MustRegister(r.fault, r.faults, r.clock, r.inverted)
	for _, in := range opt.Inputs {
		for _, k := range FrontEndFaults {
			r.fault.WithLabelValues(in, k).Set(0)
			r.faults.WithLabelValues(in, k)
		}
	}
	s.receiver = r
}

// observe sets the live series from an input's latest analysed capture
// (live), and counts its fault when it is a new capture (count).
func (r *receiver) observe(input string, rec detect.CaptureRecord, count bool) {
	kind := ""
	if rec.Fault != nil {
		kind = rec.Fault.Kind
	}
	for _, k := range FrontEndFaults {
		r.fault.WithLabelValues(input, k).Set(b2f(k == kind))
	}
	if kind != "" {
		r.fault.WithLabelValues(input, kind).Set(1) // a kind newer than the list: still bounded
		if count {
			r.faults.WithLabelValues(input, kind).Inc()
		}
	}
	st := rec.Stats
	if st != nil && st.ClockOffsetHz != nil {
		r.clock.WithLabelValues(input).Set(*st.ClockOffsetHz)
	} else {
		r.clock.DeleteLabelValues(input)
	}
	if st != nil && st.SpectrumInverted != nil {
		r.inverted.WithLabelValues(input).Set(b2f(*st.SpectrumInverted))
	} else {
		r.inverted.DeleteLabelValues(input)
	}
}
