package metrics

import "github.com/prometheus/client_golang/prometheus"

// registerOutside adds quietband_eventlog_outside_changes_total (issue
// 17, item 5): the times the event log's active file was found moved
// away, deleted, replaced or cut by something other than the daemon
// (eventlog.Log.Reattach took it up; the daemon's log says how).
func (s *Set) registerOutside(opt Options) {
	src := opt.Sources
	if src.EventLogOutsideChanges == nil {
		return
	}
	s.reg.MustRegister(prometheus.NewCounterFunc(prometheus.CounterOpts{Namespace: Namespace, Name: "eventlog_outside_changes_total",
		Help: "Times the event log's active file was found moved away, deleted, replaced or cut outside the daemon; each was taken up (records kept, or the records lost named), see the daemon's log."},
		func() float64 { return float64(src.EventLogOutsideChanges()) }))
}
