package detect

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"path/filepath"
	"testing"
	"time"

	"quietband/ingest"
	"quietband/ingest/synth"
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

// TestEpisodesWithinInput (issue 17, item 6): an interference open at the
// end of a capture goes on as the same episode in the next capture of the
// same input, not in another input's capture of the same time (two
// antennas' folders). Captures a minute apart (within episodeGap) with one
// steady CW (the synthesizer's, invented data).
func TestEpisodesWithinInput(t *testing.T) {
	cw := []synth.Emitter{{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 500e3, JNDB: 0}}}}
	s := synth.Scenario{Name: "two-antennas", Seed: 7, Start: time.Date(2026, 3, 14, 6, 0, 0, 0, time.UTC), Captures: []synth.Capture{
		{Name: "roof-1", Emitters: cw}, {Name: "mast-1", OffsetS: 60, Emitters: cw}, {Name: "roof-2", OffsetS: 120, Emitters: cw},
	}}
	dir := t.TempDir()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		t.Fatal(err)
	}
	p := NewPipeline(Config{}, nil)
	cws := map[string]Event{}
	for i, in := range []string{"roof", "mast", "roof"} {
		c, err := ingest.Open(filepath.Join(dir, truths[i].Capture), ingest.RawSettings{})
		if err != nil {
			t.Fatal(err)
		}
		res, err := p.Process(context.Background(), c, truths[i].Capture, WithInput(in))
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range res.Events {
			if e.Class == ClassCW {
				cws[s.Captures[i].Name] = e
			}
		}
	}
	r1, m1, r2 := cws["roof-1"], cws["mast-1"], cws["roof-2"]
	if r1.ID == "" || m1.ID == "" || r2.ID == "" {
		t.Fatalf("a capture without its CW: %v", cws)
	}
	if !r1.OpenAtEnd || !m1.OpenAtEnd {
		t.Fatalf("the steady CW not open at the end: roof-1 %v, mast-1 %v", r1.OpenAtEnd, m1.OpenAtEnd)
	}
	if m1.Episode != m1.ID {
		t.Errorf("mast's CW is in episode %s (roof-1's CW is %s); want an episode of its own", m1.Episode, r1.ID)
	}
	if r2.Episode != r1.Episode {
		t.Errorf("roof-2's CW is in episode %s, want roof-1's %s (same input, a minute later)", r2.Episode, r1.Episode)
	}
}
