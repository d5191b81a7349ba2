// Package monitortest holds what the daemon's tests share, in-process
// (metrics/monitor) and as a process (cmd/quietband): small raw captures
// dropped the way recorders drop them, and the event log read back and
// checked.
package monitortest

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"quietband/detect"
	"quietband/metrics/eventlog"
)

// Test captures are raw ci8 at Rate (1 MS/s), Samples (20 000) samples
// (20 ms): complex white Gaussian noise of power 2σ² = 0.02 of full scale
// and, in "tone" captures, a CW tone of amplitude 0.1 at ToneHz (+187.5
// kHz; J/N = 0.01/0.02, −3 dB, but 21 dB above the noise in its bin of a
// 256-point FFT: computed).
const (
	Rate    = 1e6
	Samples = 20000
	ToneHz  = 187.5e3
)

// CI8 is the bytes of a test capture drawn with seed, with the tone or
// without.
func CI8(seed uint64, tone bool) []byte {
	rng := rand.New(rand.NewPCG(seed, 99))
	b := make([]byte, 2*Samples)
	q := func(v float64) byte { return byte(int8(max(-127, min(127, math.Round(v*128))))) }
	for n := range Samples {
		i, qv := 0.1*rng.NormFloat64(), 0.1*rng.NormFloat64()
		if tone {
			s, c := math.Sincos(2 * math.Pi * ToneHz / Rate * float64(n))
			i, qv = i+0.1*c, qv+0.1*s
		}
		b[2*n], b[2*n+1] = q(i), q(qv)
	}
	return b
}

// Drop writes a capture the way a recorder that renames into place does.
func Drop(t testing.TB, path string, data []byte) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	tmp := filepath.Join(filepath.Dir(path), "."+filepath.Base(path)+".part")
	if err := os.WriteFile(tmp, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(tmp, path); err != nil {
		t.Fatal(err)
	}
}

// Buffer collects a daemon's diagnostic log; safe for concurrent use.
type Buffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *Buffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *Buffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// Tail is the last n lines of s.
func Tail(s string, n int) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > n {
		lines = lines[len(lines)-n:]
	}
	return strings.Join(lines, "\n")
}

// WaitFor polls ok every 20 ms until it holds, failing after timeout.
func WaitFor(t testing.TB, timeout time.Duration, what string, ok func() bool) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for !ok() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", timeout, what)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// MustRead is the content of the file at path.
func MustRead(t testing.TB, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// Record is a record of the event log, decoded.
type Record struct {
	Seq     uint64   `json:"seq"`
	Kind    string   `json:"kind"`
	ID      string   `json:"id"`
	Class   string   `json:"class"`
	Capture string   `json:"capture"`
	Input   string   `json:"input"`
	SHA256  string   `json:"sha256"`
	Status  string   `json:"status"`
	Error   string   `json:"error"`
	Events  int      `json:"events"`
	Samples int64    `json:"samples"`
	Notes   []string `json:"notes"`
	// Capture records: how the metadata reads the samples, and the rate.
	MetadataSHA256 string  `json:"metadata_sha256"`
	SampleRate     float64 `json:"sample_rate_hz"`
	// Events: the offset from the centre, and the episode.
	OffsetHz float64 `json:"offset_hz"`
	Episode  string  `json:"episode"`
}

// ReadLog reads the event log at path (every segment). A malformed line
// ends the reading: while a daemon writes, that is a torn tail it will
// cut; CheckLog verifies the whole log strictly.
func ReadLog(t testing.TB, path string) []Record {
	t.Helper()
	var out []Record
	err := eventlog.Scan(path, func(rec eventlog.Record) error {
		var r Record
		if err := json.Unmarshal(rec.Line, &r); err != nil {
			return err
		}
		out = append(out, r)
		return nil
	})
	var ve *eventlog.VerifyError
	if err != nil && !errors.Is(err, os.ErrNotExist) && !errors.As(err, &ve) {
		t.Fatal(err)
	}
	return out
}

// CaptureRecords are the capture records of recs by capture name.
func CaptureRecords(recs []Record) map[string][]Record {
	m := map[string][]Record{}
	for _, r := range recs {
		if r.Kind == eventlog.KindCapture {
			m[r.Capture] = append(m[r.Capture], r)
		}
	}
	return m
}

// CountCaptures is the number of capture records in the log at path.
func CountCaptures(t testing.TB, path string) int {
	n := 0
	for _, r := range ReadLog(t, path) {
		if r.Kind == eventlog.KindCapture {
			n++
		}
	}
	return n
}

// CheckLog verifies the hash chain over every segment (eventlog.Verify)
// and that no event id appears twice, and returns the records.
func CheckLog(t testing.TB, path string) []Record {
	t.Helper()
	segs, err := eventlog.Segments(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := eventlog.Verify(segs...); err != nil {
		t.Fatalf("event log does not verify: %v", err)
	}
	recs := ReadLog(t, path)
	ids := map[string]bool{}
	for _, r := range recs {
		if r.Kind == eventlog.KindEvent {
			if ids[r.ID] {
				t.Errorf("event id %s written twice", r.ID)
			}
			ids[r.ID] = true
		}
	}
	return recs
}

// CheckOnce checks that the log at path records n captures, each once and
// ok.
func CheckOnce(t testing.TB, path string, n int) {
	t.Helper()
	caps := CaptureRecords(CheckLog(t, path))
	if len(caps) != n {
		t.Errorf("%d captures recorded, want %d", len(caps), n)
	}
	for name, rs := range caps {
		if len(rs) != 1 || rs[0].Status != detect.StatusOK {
			t.Errorf("%s: %+v, want one ok record", name, rs)
		}
	}
}

// EventKeys returns the log's events as "capture|class|sample_start",
// counted.
func EventKeys(t testing.TB, path string) map[string]int {
	t.Helper()
	keys := map[string]int{}
	err := eventlog.Scan(path, func(rec eventlog.Record) error {
		if rec.Kind != eventlog.KindEvent {
			return nil
		}
		var e detect.Event
		if err := json.Unmarshal(rec.Line, &e); err != nil {
			return err
		}
		keys[fmt.Sprintf("%s|%s|%d", e.Capture, e.Class, e.SampleStart)]++
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return keys
}
