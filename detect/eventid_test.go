package detect

import (
	"crypto/sha256"
	"encoding/hex"
	"testing"
)

// TestEventIDIdentity (issue 17, items 6 and 7): an event id is the first
// 12 bytes of the SHA-256 (FIPS 180-4, computed here with crypto/sha256)
// of the capture's identity and the event's place. Without an input or
// metadata it is the id of before (a raw capture replayed keeps its ids);
// the same bytes in another input, or read with corrected metadata, give
// another id, and the same identity the same id.
func TestEventIDIdentity(t *testing.T) {
	sha := "9f86d081884c7d659a2feaa0c55ad015a3bf4f1b2b0b822cd15d6c15b0f00a08"
	const fp = "fp1"
	sum := func(s string) string { h := sha256.Sum256([]byte(s)); return hex.EncodeToString(h[:12]) }
	old := sum(sha + "|cw|4096|187500|" + fp)
	if got := eventID(sha, ClassCW, 4096, 187500.2, fp, "", ""); got != old {
		t.Fatalf("without input and metadata: %s, want the former id %s", got, old)
	}
	ids := map[string]string{"": old}
	for _, c := range []struct{ name, input, meta string }{
		{"input roof", "roof", ""},
		{"input mast", "mast", ""},
		{"metadata A", "", "aaaa"},
		{"metadata B", "", "bbbb"},
		{"roof, metadata A", "roof", "aaaa"},
		{"mast, metadata A", "mast", "aaaa"},
	} {
		id := eventID(sha, ClassCW, 4096, 187500.2, fp, c.input, c.meta)
		if again := eventID(sha, ClassCW, 4096, 187500.2, fp, c.input, c.meta); again != id {
			t.Errorf("%s: %s then %s", c.name, id, again)
		}
		for name, other := range ids {
			if other == id {
				t.Errorf("%s: id %s equals that of %q", c.name, id, name)
			}
		}
		ids[c.name] = id
	}
	if got, want := eventID(sha, ClassCW, 4096, 187500.2, fp, "roof", "aaaa"), sum(sha+"|cw|4096|187500|"+fp+"|metadata:aaaa|input:roof"); got != want {
		t.Errorf("roof, metadata A: %s, want %s", got, want)
	}
}
