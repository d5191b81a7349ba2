package eventlog

import (
	"encoding/json"
	"os"
	"testing"
)

// benchEvent is an event body of realistic size (about 400 bytes a line).
var benchEvent = map[string]any{
	"id": "3f9a1c0e5b7d2468", "episode": "ep-3f9a1c0e", "class": "swept",
	"capture": "site-a/2026/03/01/cap-120000.sigmf-meta", "sample_start": 4096000, "sample_count": 819200,
	"start": "2026-03-01T12:00:01.000000000Z", "end": "2026-03-01T12:00:01.200000000Z",
	"offset_hz": -125000.0, "center_hz": 1575295000.0, "bandwidth_hz": 12e6,
	"jn_db": 27.5, "power_dbfs": -18.25,
	"params":    map[string]any{"sweep_period_s": 9e-6, "sweep_low_hz": -6e6, "sweep_high_hz": 6e6, "sweep_rate_hz_per_s": 1.33e12, "shape": "up"},
	"detectors": []string{"psd", "chirp"},
}

// BenchmarkAppend measures single appends, each with its own fsync.
func BenchmarkAppend(b *testing.B) {
	l := openLog(b, tempLog(b), Options{})
	n := 0
	for b.Loop() {
		if _, err := l.Append(KindEvent, benchEvent); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "records/s")
}

// BenchmarkAppendBatch measures group commit: 10 records, one write, one
// fsync.
func BenchmarkAppendBatch(b *testing.B) {
	l := openLog(b, tempLog(b), Options{})
	items := make([]Item, 10)
	for i := range items {
		items[i] = Item{KindEvent, benchEvent}
	}
	items[9].Kind = KindCapture
	n := 0
	for b.Loop() {
		if _, err := l.AppendBatch(items); err != nil {
			b.Fatal(err)
		}
		n += len(items)
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "records/s")
}

// BenchmarkVerify measures verification of a 2000-record log.
func BenchmarkVerify(b *testing.B) {
	path := tempLog(b)
	l := openLog(b, path, Options{})
	items := make([]Item, 100)
	for i := range items {
		items[i] = Item{KindEvent, benchEvent}
	}
	for range 20 {
		if _, err := l.AppendBatch(items); err != nil {
			b.Fatal(err)
		}
	}
	n := 0
	for b.Loop() {
		sum, err := Verify(path)
		if err != nil || sum.Records != 2000 {
			b.Fatal(sum, err)
		}
		n += int(sum.Records)
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "records/s")
}

// BenchmarkWriteSync is the floor for BenchmarkAppend: a bare write of a
// line of the same size to an O_APPEND file, then fsync, without the log.
func BenchmarkWriteSync(b *testing.B) {
	f, err := os.OpenFile(tempLog(b), os.O_RDWR|os.O_APPEND|os.O_CREATE, 0o640)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	line, _ := json.Marshal(benchEvent)
	line = append(line, '\n')
	n := 0
	for b.Loop() {
		if _, err := f.Write(line); err != nil {
			b.Fatal(err)
		}
		if err := f.Sync(); err != nil {
			b.Fatal(err)
		}
		n++
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "records/s")
}
