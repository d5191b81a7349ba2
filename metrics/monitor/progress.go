package monitor

import (
	"context"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/replay"
)

// largeCapture is the data size from which the daemon logs that it starts
// a capture's analysis (its name is not in the progress metrics).
const largeCapture = 256 << 20

// analyse is replay.Analyse with the capture's progress in the metrics
// (metrics.Set.AnalysisStarted; issue 17, item 16).
func (m *Monitor) analyse(ctx context.Context, w ingest.Found) (replay.Outcome, error) {
	if w.Capture != nil && w.Capture.DataBytes >= largeCapture {
		m.log.Info("quietband run: analysing a large capture; quietband_analysis_progress_ratio follows it",
			"capture", w.Name, "input", w.Input, "bytes", w.Capture.DataBytes, "samples", w.Capture.Samples)
	}
	a := m.set.AnalysisStarted(w.Input)
	defer a.Done()
	return replay.Analyse(ctx, m.pipe, w, detect.WithObserver(a))
}
