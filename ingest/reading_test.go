package ingest

import (
	"crypto/sha256"
	"encoding/hex"
	"strings"
	"testing"
)

// TestReadingSHA256 (issue 17, item 7): the metadata's ReadingSHA256
// changes with what says how the samples are read (a corrected
// core:sample_rate, another core:datatype, another segment) and not with
// the file's layout (indentation, RFC 8259 insignificant whitespace) nor
// its annotations (what was found: an annotated copy reads the same
// samples). Its value is the SHA-256 (FIPS 180-4, computed here with
// crypto/sha256) of the compacted global object, a newline and the
// compacted captures array.
func TestReadingSHA256(t *testing.T) {
	const global = `{"core:datatype":"ci8","core:sample_rate":2000000,"core:version":"1.2.6"}`
	const captures = `[{"core:sample_start":0,"core:frequency":1575420000}]`
	base := `{"global":` + global + `,"captures":` + captures + `,"annotations":[]}`
	parse := func(doc string) string {
		t.Helper()
		m, err := ParseMeta(strings.NewReader(doc))
		if err != nil {
			t.Fatalf("%s: %v", doc, err)
		}
		return m.ReadingSHA256
	}
	want := sha256.Sum256([]byte(global + "\n" + captures))
	ref := parse(base)
	if ref != hex.EncodeToString(want[:]) {
		t.Fatalf("ReadingSHA256 = %s, want %x", ref, want)
	}
	same := map[string]string{
		"indented": "{\n  \"global\": {\n    \"core:datatype\": \"ci8\",\n    \"core:sample_rate\": 2000000,\n    \"core:version\": \"1.2.6\"\n  },\n" +
			"  \"captures\": [ { \"core:sample_start\": 0, \"core:frequency\": 1575420000 } ],\n  \"annotations\": []\n}\n",
		"annotated": `{"global":` + global + `,"captures":` + captures +
			`,"annotations":[{"core:sample_start":10,"core:sample_count":100,"core:label":"cw"}]}`,
		"other member order": `{"annotations":[],"captures":` + captures + `,"global":` + global + `}`,
	}
	for name, doc := range same {
		if got := parse(doc); got != ref {
			t.Errorf("%s: ReadingSHA256 %.12s…, want the original's %.12s…", name, got, ref)
		}
	}
	other := map[string]string{
		"sample rate corrected": strings.Replace(base, "2000000", "4000000", 1),
		"datatype":              strings.Replace(base, `"ci8"`, `"ci16_le"`, 1),
		"centre frequency":      strings.Replace(base, "1575420000", "1575420001", 1),
		"second segment": strings.Replace(base, captures,
			`[{"core:sample_start":0,"core:frequency":1575420000},{"core:sample_start":500,"core:frequency":1575420000}]`, 1),
	}
	for name, doc := range other {
		if got := parse(doc); got == ref {
			t.Errorf("%s: ReadingSHA256 unchanged", name)
		}
	}
}
