package metrics

import "github.com/prometheus/client_golang/prometheus"

// registerRetries adds quietband_capture_retries_total (issue 17, item 3):
// the times a capture's reading failed for a transient reason (out of
// file descriptors or memory, EAGAIN, a network file system's EIO …) and
// it was scheduled to be tried again rather than quarantined.
func (s *Set) registerRetries(opt Options) {
	src := opt.Sources
	if src.CaptureRetries == nil {
		return
	}
	s.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Namespace: Namespace, Name: "capture_retries_total",
		Help: "Times a capture's reading failed for a transient reason (out of descriptors or memory, EAGAIN, a network file system's I/O error) and it was scheduled to be tried again instead of quarantined."},
		func() float64 { return float64(src.CaptureRetries()) }))
}
