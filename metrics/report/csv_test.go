package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"reflect"
	"strconv"
	"testing"
	"time"

	"quietband/detect"
)

func ptrTo[T any](v T) *T { return &v }

// TestCSV: encoding/csv reads back a header equal to CSVColumns and one
// row per event; numbers and times read back to the same values, params
// to the same object, and the band edges follow centre ∓ bandwidth/2.
func TestCSV(t *testing.T) {
	t0 := time.Date(2026, 3, 14, 6, 4, 0, 123456789, time.UTC)
	events := []detect.Event{
		{ID: "a1", Episode: "a1", Class: detect.ClassCW, Capture: "site/quay-0604.sigmf-meta", SampleStart: 4096, SampleCount: 999424,
			Start: detect.Time{Time: t0}, End: detect.Time{Time: t0.Add(249856 * time.Microsecond)}, OffsetHz: 312499.87,
			CenterHz: ptrTo(1575.42e6 + 312499.87), BandwidthHz: 7890.625, JNDB: 2.8123456789, PowerDBFS: -27.1,
			Params: detect.Params{Tones: []detect.ToneParam{{OffsetHz: 312499.87, JNDB: 2.9}}}, Impact: &detect.Impact{CN0DegradationDB: 8.4},
			Detectors: []string{"cw", "spectral_kurtosis"}, Related: []string{"b2"}},
		{ID: "b2", Episode: "z9", Class: detect.ClassCN0Drop, Capture: `odd, "name".sigmf-meta`, SampleCount: 1000000,
			Start: detect.Time{Time: t0}, End: detect.Time{Time: t0.Add(250 * time.Millisecond)}, BandwidthHz: 4e6, JNDB: 13.7,
			Params: detect.Params{DropDB: ptrTo(13.9), PRNs: []int{3, 7}}, Detectors: []string{"gnss"}},
		// No centre and no times (a raw capture without a start).
		{ID: "c3", Class: detect.ClassPulsed, Capture: "raw.ci16", SampleStart: 10, SampleCount: 20, OffsetHz: -1e5, BandwidthHz: 5e5,
			JNDB: 15, Params: detect.Params{Pulses: ptrTo(12), PRIS: ptrTo(370e-6)}},
	}
	var buf bytes.Buffer
	w := NewCSVWriter(&buf)
	if err := w.Write(events[:2]); err != nil {
		t.Fatal(err)
	}
	if err := w.Write(events[2:]); err != nil {
		t.Fatal(err)
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(recs[0], CSVColumns) || len(recs) != 1+len(events) {
		t.Fatalf("header %q and %d rows", recs[0], len(recs)-1)
	}
	col := map[string]int{}
	for i, c := range CSVColumns {
		col[c] = i
	}
	num := func(row []string, name string) float64 {
		v, err := strconv.ParseFloat(row[col[name]], 64)
		if err != nil {
			t.Fatalf("%s %q: %v", name, row[col[name]], err)
		}
		return v
	}
	for i, e := range events {
		row := recs[i+1]
		if row[col["capture"]] != e.Capture || row[col["id"]] != e.ID || row[col["class"]] != e.Class || row[col["episode"]] != e.Episode {
			t.Errorf("row %d: %q", i, row)
		}
		// A cn0_drop is no interference and has no J/N (issue 18 item 2).
		if e.Class == detect.ClassCN0Drop {
			if row[col["jn_db"]] != "" {
				t.Errorf("row %d: cn0_drop with a J/N %q", i, row[col["jn_db"]])
			}
		} else if num(row, "jn_db") != e.JNDB {
			t.Errorf("row %d: jn_db %q", i, row[col["jn_db"]])
		}
		if num(row, "offset_hz") != e.OffsetHz || num(row, "bandwidth_hz") != e.BandwidthHz ||
			num(row, "power_dbfs") != e.PowerDBFS || int64(num(row, "sample_start")) != e.SampleStart || int64(num(row, "sample_count")) != e.SampleCount {
			t.Errorf("row %d numbers do not read back: %q", i, row)
		}
		if e.CenterHz != nil {
			if num(row, "center_hz") != *e.CenterHz || num(row, "freq_lower_hz") != *e.CenterHz-e.BandwidthHz/2 || num(row, "freq_upper_hz") != *e.CenterHz+e.BandwidthHz/2 {
				t.Errorf("row %d edges: %q", i, row)
			}
		} else if row[col["center_hz"]] != "" || row[col["freq_lower_hz"]] != "" || row[col["freq_upper_hz"]] != "" {
			t.Errorf("row %d: edges without a centre", i)
		}
		if e.Start.IsZero() {
			if row[col["start"]] != "" || row[col["duration_s"]] != "" {
				t.Errorf("row %d: times without times", i)
			}
		} else {
			st, err := time.Parse(time.RFC3339Nano, row[col["start"]])
			if err != nil || !st.Equal(e.Start.Time) || num(row, "duration_s") != e.End.Sub(e.Start.Time).Seconds() {
				t.Errorf("row %d times: %q, %v", i, row, err)
			}
		}
		var p detect.Params
		if err := json.Unmarshal([]byte(row[col["params"]]), &p); err != nil || !reflect.DeepEqual(p, e.Params) {
			t.Errorf("row %d params %q: %v", i, row[col["params"]], err)
		}
		if l, ok := Loss(e); ok != (row[col["cn0_loss_db"]] != "") || (ok && num(row, "cn0_loss_db") != l) {
			t.Errorf("row %d loss %q", i, row[col["cn0_loss_db"]])
		}
	}
	// No events: the header alone.
	var empty bytes.Buffer
	if err := NewCSVWriter(&empty).Flush(); err != nil {
		t.Fatal(err)
	}
	if recs, err := csv.NewReader(&empty).ReadAll(); err != nil || len(recs) != 1 {
		t.Errorf("empty CSV: %q, %v", recs, err)
	}
}
