package replay

import (
	"fmt"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

// Recorded is the set of captures an event log already holds, so that a
// replay into the same log twice (replay --log, demo --out) records
// nothing new for them (issue 18 item 5). An analysed capture is the same
// when its name, data SHA-256, metadata SHA-256 (metadata_sha256: how its
// metadata reads the samples, issue 17 item 7) and configuration
// fingerprint (config_fingerprint: detection settings and code version)
// are; a quarantined one when its name, SHA-256 (if known) and reason are.
// Records written before config_fingerprint existed match nothing; one
// written before metadata_sha256 stands for any metadata (as the daemon's
// ledger takes it).
type Recorded map[string]bool

// RecordedIn reads the capture records of the log whose active file is
// path.
func RecordedIn(path string) (Recorded, error) {
	r := Recorded{}
	err := eventlog.Scan(path, func(rec eventlog.Record) error {
		if rec.Kind != eventlog.KindCapture {
			return nil
		}
		var c detect.CaptureRecord
		if err := rec.Decode(&c); err != nil {
			return fmt.Errorf("%s: record %d: %w", path, rec.Seq, err)
		}
		r.Add(c)
		return nil
	})
	return r, err
}

func recordedKey(c detect.CaptureRecord, meta string) (string, bool) {
	if c.Status == detect.StatusOK {
		if c.SHA256 == "" || c.Config == "" {
			return "", false
		}
		return "ok\x00" + c.Capture + "\x00" + c.SHA256 + "\x00" + meta + "\x00" + c.Config, true
	}
	return "q\x00" + c.Capture + "\x00" + c.SHA256 + "\x00" + c.Error, true
}

// Has tells whether the capture of record c is already recorded: with
// its metadata, or by a record that gave none.
func (r Recorded) Has(c detect.CaptureRecord) bool {
	k, ok := recordedKey(c, c.MetadataSHA256)
	if ok && r[k] {
		return true
	}
	k, ok = recordedKey(c, "")
	return ok && r[k]
}

// Add notes the capture of record c as recorded.
func (r Recorded) Add(c detect.CaptureRecord) {
	if k, ok := recordedKey(c, c.MetadataSHA256); ok {
		r[k] = true
	}
}
