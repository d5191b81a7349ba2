package monitor

import (
	"strings"
	"testing"

	"quietband/detect"
)

// TestReplacesNote (issue 17, items 4 and 7): a record replaces the
// capture's latest when its data changed, or when only its metadata did;
// a record of the same content, one without a data SHA-256, or a capture
// whose earlier record gave no metadata SHA-256 (written before the field)
// replaces nothing.
func TestReplacesNote(t *testing.T) {
	const d1, d2, m1, m2 = "d1", "d2", "m1", "m2"
	rec := func(sha, meta string) detect.CaptureRecord {
		return detect.CaptureRecord{SHA256: sha, MetadataSHA256: meta}
	}
	tests := []struct {
		name      string
		sha, meta string // the latest record's
		rec       detect.CaptureRecord
		want      string // in the note; "" no note
	}{
		{"first record", "", "", rec(d1, m1), ""},
		{"same content", d1, m1, rec(d1, m1), ""},
		{"data grew", d1, m1, rec(d2, m1), "(data SHA-256 d1): the data changed"},
		{"raw data grew", d1, "", rec(d2, ""), "(data SHA-256 d1): the data changed"},
		{"metadata corrected", d1, m1, rec(d1, m2), "(metadata SHA-256 m1): its metadata changed after that record was written (the data did not)"},
		{"metadata no longer readable", d1, m1, rec(d1, ""), "(metadata SHA-256 m1)"},
		{"earlier record without metadata", d1, "", rec(d1, m1), ""},
		{"nothing hashed", d1, m1, rec("", ""), ""},
	}
	for _, tc := range tests {
		got := replacesNote(tc.sha, tc.meta, tc.rec)
		if tc.want == "" && got != "" || tc.want != "" && !strings.Contains(got, "replaces the earlier record of this capture "+tc.want) {
			t.Errorf("%s: %q, want %q", tc.name, got, tc.want)
		}
	}
}
