package metrics

import "github.com/prometheus/client_golang/prometheus"

// registerLedgerWritable adds quietband_ledger_writable (issue 17, item
// 9): 1 while the ledger's file (state_dir/ledger.db) can be written, 0
// while it cannot (state disk full, read-only) and the daemon runs from
// the event log instead, hashing captures it sees again. /readyz stays
// 200 and lists it.
func (s *Set) registerLedgerWritable(opt Options) {
	src := opt.Sources
	if src.LedgerWritable == nil {
		return
	}
	s.reg.MustRegister(prometheus.NewGaugeFunc(prometheus.GaugeOpts{Namespace: Namespace, Name: "ledger_writable",
		Help: "1 while the ledger (state_dir/ledger.db, a cache of the event log) can be written; 0 while it cannot and the daemon runs from the event log (captures seen again are hashed)."},
		func() float64 { return b2f(src.LedgerWritable()) }))
}
