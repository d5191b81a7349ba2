package ingest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// exampleMeta is a hand-written recording laid out like the SigMF
// specification's own example metadata (global, captures with
// core:frequency and core:datetime, annotations with frequency edges),
// here ci16_le with two capture segments and a "site" namespace.
const exampleMeta = "testdata/l1-l2-example.sigmf-meta"

func parseFile(t *testing.T, path string) *Meta {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := ParseMeta(f)
	if err != nil {
		t.Fatalf("ParseMeta(%s): %v", path, err)
	}
	return m
}

// compactJSON removes insignificant whitespace so that extra values can be
// compared however they were indented.
func compactJSON(t *testing.T, raw json.RawMessage) string {
	t.Helper()
	var b bytes.Buffer
	if err := json.Compact(&b, raw); err != nil {
		t.Fatalf("extra value %q is not JSON: %v", raw, err)
	}
	return b.String()
}

func checkExtra(t *testing.T, where string, got map[string]json.RawMessage, want map[string]string) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("%s: extra keys %v, want %v", where, extraKeys(got), want)
	}
	for k, v := range want {
		raw, ok := got[k]
		if !ok {
			t.Errorf("%s: extra key %q lost", where, k)
			continue
		}
		if c := compactJSON(t, raw); c != v {
			t.Errorf("%s: extra %q = %s, want %s", where, k, c, v)
		}
	}
}

func extraKeys(m map[string]json.RawMessage) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}

// checkExampleMeta checks every typed field of the fixture against the
// values written in it by hand.
func checkExampleMeta(t *testing.T, m *Meta) {
	t.Helper()
	g := m.Global
	if g.Datatype != "ci16_le" || g.Version != "1.2.6" || g.SampleRate != 4e6 || g.NumChannels != 1 ||
		g.Offset != 0 || g.SHA512 != "" {
		t.Errorf("global core fields: %+v", g)
	}
	if g.Description != "GPS L1 then L2, hand-written test fixture" || g.Author != "quietband tests" ||
		g.HW != "active patch antenna, 12-bit front end" || g.Recorder != "hand-written" {
		t.Errorf("global text fields: %q %q %q %q", g.Description, g.Author, g.HW, g.Recorder)
	}
	// SigMF: applications must keep working with, and should preserve,
	// fields they do not understand, including core ones (core:license).
	checkExtra(t, "global", g.Extra, map[string]string{
		"site:antenna": `"roof-2"`,
		"site:mast":    `{"height_m":12.5,"bearing_deg":[0,90]}`,
		"core:license": `"https://example.org/licenses/test-fixture"`,
	})
	if len(m.Captures) != 2 {
		t.Fatalf("%d capture segments, want 2", len(m.Captures))
	}
	segs := []struct {
		start uint64
		freq  float64
		when  time.Time
		extra map[string]string
	}{
		// GPS L1 1575.42 MHz, L2 1227.60 MHz (IS-GPS-200).
		{0, 1575.42e6, time.Date(2021, 6, 18, 23, 17, 51, 163959000, time.UTC), map[string]string{"site:antenna": `"roof-2"`}},
		{2000000, 1227.6e6, time.Date(2021, 6, 18, 23, 17, 51, 663959000, time.UTC), map[string]string{"core:global_index": "98000000"}},
	}
	for i, w := range segs {
		s := m.Captures[i]
		if s.SampleStart != w.start || !s.HasFrequency || s.Frequency != w.freq || !s.Datetime.Equal(w.when) ||
			s.Datetime.Location() != time.UTC || s.HeaderBytes != 0 {
			t.Errorf("captures[%d] = %+v, want start %d freq %g time %v", i, s, w.start, w.freq, w.when)
		}
		checkExtra(t, fmt.Sprintf("captures[%d]", i), s.Extra, w.extra)
	}
	if len(m.Annotations) != 2 {
		t.Fatalf("%d annotations, want 2", len(m.Annotations))
	}
	a := m.Annotations[0]
	if a.SampleStart != 1000 || a.SampleCount == nil || *a.SampleCount != 4000 ||
		a.FreqLowerEdge == nil || *a.FreqLowerEdge != 1575.40e6 || a.FreqUpperEdge == nil || *a.FreqUpperEdge != 1575.44e6 ||
		a.Label != "cw" || a.Comment != "unmodulated carrier 20 kHz below L1" || a.Generator != "hand" ||
		a.UUID != "9b2c6f0e-3f5e-4b8a-9d21-6c1f0a7e4b55" {
		t.Errorf("annotations[0] = %+v", a)
	}
	checkExtra(t, "annotations[0]", a.Extra, map[string]string{})
	a = m.Annotations[1]
	// SigMF: no core:sample_count means "through the end of the capture".
	if a.SampleStart != 2100000 || a.SampleCount != nil || a.FreqLowerEdge == nil || *a.FreqLowerEdge != 1226.6e6 ||
		*a.FreqUpperEdge != 1228.6e6 || a.Label != "wideband" || a.Comment != "" || a.UUID != "" {
		t.Errorf("annotations[1] = %+v", a)
	}
	checkExtra(t, "annotations[1]", a.Extra, map[string]string{"site:operator_note": `"through end of capture"`})
}

func TestParseMetaExample(t *testing.T) {
	checkExampleMeta(t, parseFile(t, exampleMeta))
}

// TestMetaRoundTrip marshals the fixture and parses it again: every typed
// field and every extra key survive, the document has exactly the three
// top-level members SigMF allows, and a second marshal is identical to the
// first.
func TestMetaRoundTrip(t *testing.T) {
	m := parseFile(t, exampleMeta)
	out, err := m.MarshalJSON()
	if err != nil {
		t.Fatal(err)
	}
	var top map[string]json.RawMessage
	if err := json.Unmarshal(out, &top); err != nil {
		t.Fatalf("MarshalJSON output is not JSON: %v", err)
	}
	// SigMF 1.2.6 schema: top level has additionalProperties false.
	if len(top) != 3 || top["global"] == nil || top["captures"] == nil || top["annotations"] == nil {
		t.Errorf("top-level keys %v, want exactly global, captures, annotations", extraKeys(top))
	}
	again, err := ParseMeta(bytes.NewReader(out))
	if err != nil {
		t.Fatalf("ParseMeta(MarshalJSON()): %v\n%s", err, out)
	}
	checkExampleMeta(t, again)
	out2, err := again.MarshalJSON()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(out, out2) {
		t.Errorf("second marshal differs:\n%s\n----\n%s", out, out2)
	}

	// WriteMeta: the same document, newline-terminated, and no temporary
	// file left beside it.
	dir := t.TempDir()
	path := filepath.Join(dir, "rt"+MetaExt)
	if err := WriteMeta(path, m); err != nil {
		t.Fatal(err)
	}
	written, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(written, append(out, '\n')) {
		t.Errorf("WriteMeta wrote %q, want MarshalJSON output plus newline", written)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("WriteMeta left %d files in the folder, want 1", len(ents))
	}
	checkExampleMeta(t, parseFile(t, path))
}

// TestMetaAnnotationsSorted checks that MarshalJSON writes annotations in
// ascending core:sample_start, as SigMF requires of the array.
func TestMetaAnnotationsSorted(t *testing.T) {
	m := &Meta{Global: Global{Datatype: "cf32_le", Version: SigMFVersion, SampleRate: 1e6},
		Annotations: []Annotation{{SampleStart: 30, Label: "c"}, {SampleStart: 10, Label: "a"}, {SampleStart: 20, Label: "b"}}}
	out, err := m.MarshalJSON()
	if err != nil {
		t.Fatal(err)
	}
	back, err := ParseMeta(bytes.NewReader(out))
	if err != nil {
		t.Fatal(err)
	}
	var labels string
	for _, a := range back.Annotations {
		labels += a.Label
	}
	if labels != "abc" {
		t.Errorf("annotation order %q, want abc", labels)
	}
	if len(back.Captures) != 0 {
		t.Errorf("empty captures array came back as %d segments", len(back.Captures))
	}
}

// TestDatetime checks core:datetime against SigMF 1.2.6 (RFC 3339 §5.6
// with "Z" as the only allowed offset, any number of fraction digits).
func TestDatetime(t *testing.T) {
	cases := []struct {
		in   string
		want time.Time // zero: an error is expected
		err  string
	}{
		{"2021-06-18T23:17:51.163959Z", time.Date(2021, 6, 18, 23, 17, 51, 163959000, time.UTC), ""},
		{"2021-06-18T23:17:51Z", time.Date(2021, 6, 18, 23, 17, 51, 0, time.UTC), ""},
		// More than 9 fraction digits: allowed by RFC 3339; kept to the ns.
		{"2021-06-18T23:17:51.1234567891234Z", time.Date(2021, 6, 18, 23, 17, 51, 123456789, time.UTC), ""},
		{"1999-12-31T23:59:59.999999999Z", time.Date(1999, 12, 31, 23, 59, 59, 999999999, time.UTC), ""},
		{"2021-06-18T23:17:51+02:00", time.Time{}, "Z suffix"},
		{"2021-06-18T23:17:51+00:00", time.Time{}, "Z suffix"},
		{"2021-06-18T23:17:51.5z", time.Time{}, "Z suffix"},
		{"2021-06-18 23:17:51Z", time.Time{}, "not RFC 3339"},
		{"2021-13-18T23:17:51Z", time.Time{}, "not RFC 3339"},
		{"2021-06-18T23:17Z", time.Time{}, "not RFC 3339"},
		{"Z", time.Time{}, "not RFC 3339"},
		{"", time.Time{}, "Z suffix"},
	}
	for _, tc := range cases {
		got, err := ParseDatetime(tc.in)
		if tc.err == "" {
			if err != nil || !got.Equal(tc.want) || got.Location() != time.UTC {
				t.Errorf("ParseDatetime(%q) = %v, %v, want %v", tc.in, got, err, tc.want)
			}
			continue
		}
		if err == nil || !strings.Contains(err.Error(), tc.err) || !strings.Contains(err.Error(), "core:datetime") {
			t.Errorf("ParseDatetime(%q) error %v, want one mentioning core:datetime and %q", tc.in, err, tc.err)
		}
	}

	format := []struct {
		t    time.Time
		want string
	}{
		{time.Date(2021, 6, 18, 23, 17, 51, 163959000, time.UTC), "2021-06-18T23:17:51.163959Z"},
		{time.Date(2021, 6, 19, 1, 17, 51, 0, time.FixedZone("CEST", 2*3600)), "2021-06-18T23:17:51Z"},
		{time.Date(2021, 6, 18, 23, 17, 51, 1, time.UTC), "2021-06-18T23:17:51.000000001Z"},
	}
	for _, tc := range format {
		if got := FormatDatetime(tc.t); got != tc.want {
			t.Errorf("FormatDatetime(%v) = %q, want %q", tc.t, got, tc.want)
		}
		if back, err := ParseDatetime(FormatDatetime(tc.t)); err != nil || !back.Equal(tc.t) {
			t.Errorf("ParseDatetime(FormatDatetime(%v)) = %v, %v", tc.t, back, err)
		}
	}
}

// metaDoc builds a metadata document from the insides of its three members.
func metaDoc(global, captures, annotations string) string {
	return `{"global": {` + global + `}, "captures": [` + captures + `], "annotations": [` + annotations + `]}`
}

const okGlobal = `"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": 2e6`

// TestParseMetaErrors feeds broken metadata, one problem each, and checks
// that the error names it in SigMF's field names (rules from SigMF 1.2.6
// sigmf-schema.json and additional_content.md).
func TestParseMetaErrors(t *testing.T) {
	cases := []struct {
		name string
		in   string
		want []string
	}{
		{"empty file", "", []string{"empty"}},
		// The missing colon is on line 4; its first byte, the quote of
		// "1.2.6", is column 20 (4 spaces, 14 bytes of key, 1 space).
		{"malformed JSON", "{\n  \"global\": {\n    \"core:datatype\": \"ci16_le\",\n    \"core:version\" \"1.2.6\"\n  }\n}",
			[]string{"malformed JSON", "line 4 column 20"}},
		{"malformed JSON first line", `{"global": }`, []string{"malformed JSON", "line 1 column 12"}},
		{"truncated JSON", `{"global": {"core:datatype": "ci16_le"`, []string{"malformed JSON", "line 1", "unexpected end"}},
		{"top level not an object", `[1, 2]`, []string{"malformed JSON"}},
		{"missing global", `{"captures": [], "annotations": []}`, []string{`"global"`, "missing"}},
		{"global not an object", `{"global": [], "captures": [], "annotations": []}`, []string{`"global" must be an object`}},
		{"missing captures", `{"global": {` + okGlobal + `}, "annotations": []}`, []string{`"captures"`}},
		{"captures not an array", `{"global": {` + okGlobal + `}, "captures": {}, "annotations": []}`, []string{`"captures" must be an array`}},
		{"annotations not an array", `{"global": {` + okGlobal + `}, "captures": [], "annotations": 3}`, []string{`"annotations" must be an array`}},
		{"missing datatype", metaDoc(`"core:version": "1.2.6"`, "", ""), []string{"core:datatype is missing"}},
		{"datatype not a string", metaDoc(`"core:datatype": 16, "core:version": "1.2.6"`, "", ""), []string{"core:datatype must be a string"}},
		{"missing version", metaDoc(`"core:datatype": "ci16_le"`, "", ""), []string{"core:version is missing"}},
		{"version with v", metaDoc(`"core:datatype": "ci16_le", "core:version": "v1.0.0"`, "", ""), []string{`"v1.0.0"`, "1.x.y"}},
		{"version 2", metaDoc(`"core:datatype": "ci16_le", "core:version": "2.0.0"`, "", ""), []string{`"2.0.0"`, "1.x.y"}},
		{"version two parts", metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2"`, "", ""), []string{`"1.2"`}},
		{"sample_rate 0", metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": 0`, "", ""), []string{"core:sample_rate", "out of range"}},
		{"sample_rate -1", metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": -1`, "", ""), []string{"core:sample_rate -1", "out of range"}},
		{"sample_rate 1e15", metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": 1e15`, "", ""), []string{"core:sample_rate 1e+15", "out of range"}},
		{"sample_rate string", metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": "2e6"`, "", ""), []string{"core:sample_rate must be a number", `"2e6"`}},
		{"num_channels 2", metaDoc(okGlobal+`, "core:num_channels": 2`, "", ""), []string{"core:num_channels is 2", "single-channel"}},
		{"num_channels -1", metaDoc(okGlobal+`, "core:num_channels": -1`, "", ""), []string{"core:num_channels must be a non-negative integer"}},
		{"dataset (non-conforming)", metaDoc(okGlobal+`, "core:dataset": "x.bin"`, "", ""), []string{"core:dataset", "non-conforming"}},
		{"captures out of order", metaDoc(okGlobal, `{"core:sample_start": 100}, {"core:sample_start": 50}`, ""), []string{"captures[1]", "ascending"}},
		{"captures repeated start", metaDoc(okGlobal, `{"core:sample_start": 0}, {"core:sample_start": 0}`, ""), []string{"captures[1]", "not after"}},
		{"capture without sample_start", metaDoc(okGlobal, `{"core:frequency": 1.5e9}`, ""), []string{"captures[0]", "core:sample_start is missing"}},
		{"sample_start -1", metaDoc(okGlobal, `{"core:sample_start": -1}`, ""), []string{"captures[0]", "core:sample_start must be a non-negative integer", "-1"}},
		{"sample_start 1.5", metaDoc(okGlobal, `{"core:sample_start": 1.5}`, ""), []string{"captures[0]", "core:sample_start must be a non-negative integer", "1.5"}},
		{"sample_start string", metaDoc(okGlobal, `{"core:sample_start": "0"}`, ""), []string{"core:sample_start must be a non-negative integer"}},
		{"frequency absurd", metaDoc(okGlobal, `{"core:sample_start": 0, "core:frequency": 5e12}`, ""), []string{"core:frequency", "out of range"}},
		{"datetime with offset", metaDoc(okGlobal, `{"core:sample_start": 0, "core:datetime": "2021-06-18T23:17:51+02:00"}`, ""), []string{"captures[0]", "core:datetime", "Z suffix"}},
		{"datetime lowercase z", metaDoc(okGlobal, `{"core:sample_start": 0, "core:datetime": "2021-06-18T23:17:51z"}`, ""), []string{"core:datetime", "Z suffix"}},
		{"header_bytes", metaDoc(okGlobal, `{"core:sample_start": 0, "core:header_bytes": 512}`, ""), []string{"core:header_bytes", "non-conforming"}},
		{"annotation without sample_start", metaDoc(okGlobal, `{"core:sample_start": 0}`, `{"core:label": "x"}`), []string{"annotations[0]", "core:sample_start is missing"}},
		{"annotation sample_count 2.5", metaDoc(okGlobal, "", `{"core:sample_start": 0, "core:sample_count": 2.5}`), []string{"annotations[0]", "core:sample_count must be a non-negative integer"}},
		{"only lower edge", metaDoc(okGlobal, "", `{"core:sample_start": 0}, {"core:sample_start": 5, "core:freq_lower_edge": 1e6}`), []string{"annotations[1]", "core:freq_lower_edge and core:freq_upper_edge must be given together"}},
		{"only upper edge", metaDoc(okGlobal, "", `{"core:sample_start": 5, "core:freq_upper_edge": 1e6}`), []string{"annotations[0]", "given together"}},
		{"edges reversed", metaDoc(okGlobal, "", `{"core:sample_start": 5, "core:freq_lower_edge": 2e6, "core:freq_upper_edge": 1e6}`), []string{"core:freq_lower_edge 2e+06 is above core:freq_upper_edge 1e+06"}},
		{"label not a string", metaDoc(okGlobal, "", `{"core:sample_start": 5, "core:label": 7}`), []string{"core:label must be a string"}},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m, err := ParseMeta(strings.NewReader(tc.in))
			if err == nil {
				t.Fatalf("ParseMeta accepted it: %+v", m)
			}
			for _, sub := range tc.want {
				if !strings.Contains(err.Error(), sub) {
					t.Errorf("error %q does not mention %q", err, sub)
				}
			}
		})
	}
}

// TestParseMetaAccepts checks edge values that SigMF 1.2.6 allows.
func TestParseMetaAccepts(t *testing.T) {
	cases := []struct {
		name  string
		in    string
		check func(*Meta) bool
	}{
		// 1.2.6 changed core:sample_rate's minimum to exclusiveMinimum 0
		// (sub-hertz rates allowed).
		{"sample_rate 0.5", metaDoc(`"core:datatype": "cf32_le", "core:version": "1.2.6", "core:sample_rate": 0.5`, "", ""),
			func(m *Meta) bool { return m.Global.SampleRate == 0.5 }},
		// core:sample_rate is optional in the schema.
		{"no sample_rate", metaDoc(`"core:datatype": "cf32_le", "core:version": "1.0.0"`, "", ""),
			func(m *Meta) bool { return m.Global.SampleRate == 0 && m.Global.Version == "1.0.0" }},
		// Readers accept any 1.x.y version (ECOSYSTEM.md §1).
		{"version 1.3.12", metaDoc(`"core:datatype": "cf32_le", "core:version": "1.3.12"`, "", ""),
			func(m *Meta) bool { return m.Global.Version == "1.3.12" }},
		// "captures": [] means one capture from sample 0; no segments here.
		{"empty captures", metaDoc(okGlobal, "", ""), func(m *Meta) bool { return len(m.Captures) == 0 && len(m.Annotations) == 0 }},
		{"frequency 0 Hz", metaDoc(okGlobal, `{"core:sample_start": 0, "core:frequency": 0}`, ""),
			func(m *Meta) bool { return m.Captures[0].HasFrequency && m.Captures[0].Frequency == 0 }},
		{"no frequency", metaDoc(okGlobal, `{"core:sample_start": 0}`, ""),
			func(m *Meta) bool { return !m.Captures[0].HasFrequency && m.Captures[0].Datetime.IsZero() }},
		{"num_channels 1", metaDoc(okGlobal+`, "core:num_channels": 1`, "", ""), func(m *Meta) bool { return m.Global.NumChannels == 1 }},
		{"sample_start integral float", metaDoc(okGlobal, `{"core:sample_start": 1e3}`, ""), func(m *Meta) bool { return m.Captures[0].SampleStart == 1000 }},
		{"header_bytes 0", metaDoc(okGlobal, `{"core:sample_start": 0, "core:header_bytes": 0}`, ""), func(m *Meta) bool { return len(m.Captures[0].Extra) == 0 }},
		{"annotations unsorted", metaDoc(okGlobal, "", `{"core:sample_start": 9}, {"core:sample_start": 3}`), func(m *Meta) bool { return len(m.Annotations) == 2 }},
	}
	for _, tc := range cases {
		m, err := ParseMeta(strings.NewReader(tc.in))
		if err != nil {
			t.Errorf("%s: %v", tc.name, err)
			continue
		}
		if !tc.check(m) {
			t.Errorf("%s: parsed as %+v", tc.name, m)
		}
	}
}

// TestParseMetaTooLarge checks that oversize metadata is refused, not
// parsed (a recording's metadata is kilobytes).
func TestParseMetaTooLarge(t *testing.T) {
	big := metaDoc(okGlobal+`, "site:pad": "`+strings.Repeat("x", maxMetaBytes)+`"`, "", "")
	_, err := ParseMeta(strings.NewReader(big))
	if err == nil || !strings.Contains(err.Error(), "larger than") {
		t.Errorf("ParseMeta of %d bytes: %v, want a size refusal", len(big), err)
	}
}
