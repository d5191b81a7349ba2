// Package metrics is what the quietband daemon exposes: Prometheus metrics
// on a registry of its own, the HTTP endpoints (/metrics, /healthz,
// /readyz, /api/events) and, in the subpackage eventlog, the durable event
// log. Beside them, what the daemon and replay make of the captures, so
// that a tool or a test imports it without the binary: the ledger of what
// the log holds (ledger), the site baseline file (baseline), the daemon's
// work (monitor), the replay driver (replay), the analyst's report
// (report) and the machine's measurements (bench).
//
// Metric names follow the Prometheus naming rules: the quietband_ prefix,
// base units (seconds, bytes; dB quantities carry _db, _dbfs or _dbhz as
// their unit, since the rules list no logarithmic unit), _total on
// counters, and only bounded labels: class (the event classes of
// detect.Classes), prn (1–32), result (ok, quarantined) and input (the
// names in the daemon's configuration). Nothing is labelled by file name,
// sample index or frequency. The whole exposition passes the linter of
// `promtool check metrics` (client_golang's promlint).
//
// # Interference state
//
// quietband_interference_active{input,class} is 1 while an interference of
// that class is open at the end of the input's latest analysed capture, and
// 0 otherwise. "Open at the end" is the pipeline's one definition
// (detect.Event.OpenAtEnd, the same on which it continues an episode into
// the next capture): the event was seen in the capture's last block, or,
// when that block was too short for a spectral pass, held open through it;
// cn0_drop and spoofing, judged over the whole capture, always are. The
// next capture of the input without such an event clears it; a
// quarantined capture changes nothing. quietband_jn_db{input,class} is the
// largest J/N among the open events of the class and is absent while
// nothing of the class is open.
//
// # Spoofing
//
// Spoofing is an event class like the others (interference_active, jn_db
// and events_total carry class="spoofing"). Beside them,
// quietband_spoofing_active{input,kind} says which kind (counterfeit,
// meaconing) the latest capture's spoofing event is,
// quietband_spoofing_prns{input} how many satellites it names (0 without
// one), quietband_spoofing_power_over_authentic_db{input} how much
// stronger the false signals are, and quietband_spoofing_delay_seconds
// a meacon's delay (the last two absent while there is nothing to say).
//
// Averaging dB gauges over labels is not the mean power; the HELP texts
// say so where it matters.
package metrics
