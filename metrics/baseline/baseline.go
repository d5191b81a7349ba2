// Package baseline keeps a site's learned baselines (detect.Baselines: the
// passband, power, C/N0 and sky of each input) in a file between runs:
// the daemon's state_dir/baseline.json and replay's --baseline. It is the
// one load and the one save of that file.
package baseline

import (
	"bytes"
	"fmt"
	"os"
	"time"

	"quietband/detect"
	"quietband/ingest"
)

// FileName is the baseline's file in the daemon's state folder.
const FileName = "baseline.json"

// UnusableError is Load's error for a file that exists but does not hold
// baselines (detect.ReadBaselines refuses it).
type UnusableError struct {
	Path string
	Err  error
}

func (e *UnusableError) Error() string { return e.Path + ": " + e.Err.Error() }
func (e *UnusableError) Unwrap() error { return e.Err }

// Load reads the baselines kept in the file at path (marked loaded). A
// missing file gives an error wrapping fs.ErrNotExist, one that does not
// parse an *UnusableError; both name the file.
func Load(path string) (*detect.Baselines, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b, err := detect.ReadBaselines(f)
	if err != nil {
		return nil, &UnusableError{Path: path, Err: err}
	}
	return b, nil
}

// Save writes b to path atomically: a reader, or a start after a crash,
// sees the old file or the whole new one (ingest.WriteFileAtomic).
func Save(path string, b *detect.Baselines) error {
	var buf bytes.Buffer
	if _, err := b.WriteTo(&buf); err != nil {
		return fmt.Errorf("encoding the baseline: %w", err)
	}
	return ingest.WriteFileAtomic(path, buf.Bytes())
}

// SetAside renames an unusable baseline file to path.bad-<UTC time of now>,
// so that learning starts afresh without losing it, and returns the new
// name.
func SetAside(path string, now time.Time) (string, error) {
	aside := path + ".bad-" + now.UTC().Format("20060102T150405Z")
	return aside, os.Rename(path, aside)
}
