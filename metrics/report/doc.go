// Package report makes the analyst's report of a replay: pictures of each
// capture drawn from the pipeline's own FFT pass, a self-contained HTML
// page, a CSV of the events and SigMF annotations.
//
// It sits beside the event log (metrics/eventlog) because it renders what
// the log records, the events and capture records of detect, and is
// importable by any tool that wants to draw a capture; detect and ingest
// do not depend on it.
//
// # Pictures
//
// An Observer (a detect.BlockObserver) watches one capture's blocks and
// keeps a bounded Summary, whatever the capture length: a spectrogram
// grid of at most MaxRows time rows × MaxCols frequency columns (frames
// averaged into rows, bins into columns, in dBFS per bin), the mean PSD
// and the noise reference, per-bin spectral kurtosis (maximum and mean
// over blocks) with its thresholds, the power envelope (at most
// MaxEnvelope points) and up to MaxPulses pulse arrival times.
//
// A Report turns summaries, capture records and events into PNG pictures
// of fixed size drawn with gonum.org/v1/plot: the spectrogram with the
// events as labelled boxes (sample_start … sample_start+sample_count by
// offset ± bandwidth/2), the PSD against the site baseline, spectral
// kurtosis with its thresholds, the power envelope with pulse arrivals,
// and a site timeline over all captures; for a spoofing event, one
// picture per PRN of the correlation power against code phase with both
// peaks marked (WriteCorrelation). Close writes index.html (one
// html/template page with its CSS and a small self-check script inline,
// allowed by a Content-Security-Policy that names their hashes and lets
// the page load nothing but its own images) and report.json, which gives
// every picture's Layout: where its data area lies in pixels and what
// values its edges stand for.
//
// # CSV
//
// CSVWriter writes one row per event under a header row. The columns,
// which may be added to at the end but are never renamed, removed or
// reordered (CSVColumns):
//
//	capture        capture name relative to the watched root (as in the event log)
//	id             event id
//	episode        episode id (shared across captures by one interference)
//	class          cw, swept, pulsed, wideband_noise, narrowband_noise, cn0_drop or spoofing
//	start, end     RFC 3339 UTC with nine fractional digits; empty if unknown
//	duration_s     end − start in seconds; empty if unknown
//	sample_start   first sample of the event in the capture
//	sample_count   number of samples
//	offset_hz      centre of the interference relative to the capture centre
//	center_hz      absolute centre (RF), empty when the capture centre is unknown
//	bandwidth_hz   occupied bandwidth
//	freq_lower_hz  center_hz − bandwidth_hz/2, empty when center_hz is
//	freq_upper_hz  center_hz + bandwidth_hz/2, empty when center_hz is
//	jn_db          J/N (dB) while present (in-pulse peak for pulses)
//	power_dbfs     interference power (dBFS)
//	cn0_loss_db    impact.cn0_degradation_db, or params.drop_db for cn0_drop; empty if neither
//	detectors      detectors that fired, space-separated
//	related        ids of linked events, space-separated
//	params         the class parameters as JSON (the event log's params object)
//
// Numbers are written in the shortest form that reads back to the same
// float64 (strconv 'g', −1).
//
// # SigMF annotations
//
// Annotations makes one SigMF annotation per event (core:sample_start,
// core:sample_count, core:freq_lower_edge and core:freq_upper_edge as
// absolute frequencies when the centre is known and neither otherwise,
// core:label the class, core:generator Generator, core:uuid EventUUID,
// core:comment the parameters as JSON). AnnotateFile replaces the
// annotations of an earlier quietband pass (core:generator starting with
// "quietband ") and keeps every other annotation and key.
//
// Where the copy goes: SigMF pairs a metadata file with its dataset by
// base name (NAME.sigmf-meta beside NAME.sigmf-data), so an annotated copy
// is written under the report folder as annotations/NAME.sigmf-meta, with
// the capture's relative path and its unchanged name. It is a drop-in
// replacement for the original metadata and names no other file. A copy
// beside the capture under another name (NAME.quietband.sigmf-meta) would
// break that pairing, and the watcher and replay would take it for a
// recording whose dataset is missing and quarantine it; and the capture
// folder belongs to the recorder, so quietband writes there only when
// asked to annotate in place.
package report
