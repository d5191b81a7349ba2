package metrics

import (
	"errors"
	"fmt"
	"io"
	"os"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

// LastCaptures reads, from the event log at path, the latest analysed
// (status ok) capture of each of inputs with the events recorded with it,
// for Set.Restore after a restart. The segments are read from the newest
// back until every input has one (or the log's start is reached). At is
// the modification time of the file that holds the capture's record: when
// it was written, to within the records written after it.
//
// A record without an input (written before records carried one) is
// taken as the input's only when inputs holds one input.
//
// Events are those of the capture's batch: the event records just before
// its capture record that name the capture. An event recorded before (the
// same data under another name) is not in the batch; an interference open
// at the end of such a capture is restored as not active.
func LastCaptures(path string, inputs []string) (map[string]Capture, error) {
	segs, err := eventlog.Segments(path)
	if err != nil {
		return nil, err
	}
	want := map[string]bool{}
	for _, in := range inputs {
		want[in] = true
	}
	out := map[string]Capture{}
	for i := len(segs) - 1; i >= 0 && len(out) < len(want); i-- {
		st, err := os.Stat(segs[i])
		if err != nil {
			return nil, err
		}
		found, err := lastInSegment(segs[i], want, len(inputs) == 1)
		if err != nil {
			return nil, err
		}
		for in, c := range found {
			if _, ok := out[in]; !ok {
				c.At = st.ModTime()
				out[in] = c
			}
		}
	}
	return out, nil
}

// lastInSegment returns the latest ok capture of each wanted input in
// one file of the log.
func lastInSegment(file string, want map[string]bool, single bool) (map[string]Capture, error) {
	found := map[string]Capture{}
	r := eventlog.NewReader(file)
	defer r.Close()
	var batch []detect.Event
	for {
		rec, err := r.Next()
		if errors.Is(err, io.EOF) {
			return found, nil
		}
		if err != nil {
			return nil, err
		}
		switch rec.Kind {
		case eventlog.KindEvent:
			var e detect.Event
			if err := rec.Decode(&e); err != nil {
				return nil, fmt.Errorf("%s: record %d: %w", file, rec.Seq, err)
			}
			batch = append(batch, e)
		case eventlog.KindCapture:
			var c detect.CaptureRecord
			if err := rec.Decode(&c); err != nil {
				return nil, fmt.Errorf("%s: record %d: %w", file, rec.Seq, err)
			}
			events := batch[:0:0]
			for _, e := range batch {
				if e.Capture == c.Capture {
					events = append(events, e)
				}
			}
			batch = batch[:0]
			in := c.Input
			if in == "" && single {
				for name := range want {
					in = name
				}
			}
			if !want[in] || c.Status != detect.StatusOK {
				continue
			}
			found[in] = Capture{Input: in, Record: c, Events: events, Satellites: c.Stats != nil && c.Stats.Satellites != nil}
		}
	}
}
