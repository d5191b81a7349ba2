package metrics

import "github.com/prometheus/client_golang/prometheus"

// registerDamaged adds quietband_eventlog_damaged_files (issue 17, item 8):
// the files of the event log set aside because they failed verification
// (eventlog.Damaged), read at each scrape. It stays above 0, and
// QuietbandEventLogDamaged fires, until an operator has looked at them
// (quietband verify names the place) and moved them away.
func (s *Set) registerDamaged(opt Options) {
	src := opt.Sources
	if src.EventLogDamaged == nil {
		return
	}
	s.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: Namespace, Name: "eventlog_damaged_files",
		Help: "Files of the event log set aside because they failed verification (<log>.damaged-<seq>), still beside the log; the daemon went on in a new file whose first record (kind break) carries the last good hash."},
		func() float64 { return float64(src.EventLogDamaged()) }))
}
