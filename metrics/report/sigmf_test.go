package report

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest"
	"quietband/ingest/synth"
)

// uuidV8 is the RFC 9562 textual form with version 8 (§5.8) and the
// variant bits 10 (§4.1: the first hex digit of the fourth group is 8, 9,
// a or b).
var uuidV8 = regexp.MustCompile(`^[0-9a-f]{8}-[0-9a-f]{4}-8[0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}$`)

func readMeta(t *testing.T, path string) *ingest.Meta {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	m, err := ingest.ParseMeta(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return m
}

// checkSigMFAnnotation applies the SigMF core rules for annotations
// (SigMF 1.2, "Annotation Segment Objects"): core:sample_start required
// (ParseMeta enforces it), core:sample_count present here by design,
// core:freq_lower_edge and core:freq_upper_edge both or neither with
// lower ≤ upper, core:label recommended at most 20 characters.
func checkSigMFAnnotation(t *testing.T, a ingest.Annotation) {
	t.Helper()
	if a.SampleCount == nil || *a.SampleCount == 0 {
		t.Errorf("annotation at %d: no core:sample_count", a.SampleStart)
	}
	if (a.FreqLowerEdge == nil) != (a.FreqUpperEdge == nil) {
		t.Errorf("annotation at %d: one frequency edge without the other", a.SampleStart)
	}
	if a.FreqLowerEdge != nil && *a.FreqLowerEdge > *a.FreqUpperEdge {
		t.Errorf("annotation at %d: lower edge %g above upper %g", a.SampleStart, *a.FreqLowerEdge, *a.FreqUpperEdge)
	}
	if n := len([]rune(a.Label)); n == 0 || n > MaxLabel {
		t.Errorf("annotation at %d: label %q has %d characters", a.SampleStart, a.Label, n)
	}
	if a.Generator != Generator || !uuidV8.MatchString(a.UUID) {
		t.Errorf("annotation at %d: generator %q, uuid %q", a.SampleStart, a.Generator, a.UUID)
	}
}

// TestAnnotateInPlace: annotating a capture's metadata in place, twice,
// leaves exactly one quietband annotation per event, keeps a foreign
// annotation and an extension key, passes the SigMF rules after a round
// trip through ParseMeta, and the capture still opens.
func TestAnnotateInPlace(t *testing.T) {
	dir := t.TempDir()
	obs := runScenario(t, dir, scenario(4e6,
		synth.Capture{Name: "clean", DurationS: 0.06},
		synth.Capture{Name: "tones", DurationS: 0.1, Emitters: []synth.Emitter{
			{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 250e3, JNDB: 10}}},
			{Kind: synth.KindNarrowbandNoise, OffsetHz: -900e3, BandwidthHz: 200e3, JNDB: 8, StartS: 0.03, EndS: 0.08}}}))
	ob := obs[1]
	events := ob.result.Events
	if len(events) < 2 {
		t.Fatalf("%d events, want the tone and the noise band", len(events))
	}
	// Another tool's annotation and key, written before quietband's.
	m := readMeta(t, ob.capture.MetaPath)
	one := uint64(1000)
	m.Annotations = append(m.Annotations, ingest.Annotation{SampleStart: 5000, SampleCount: &one, Label: "operator note", Generator: "site logbook"})
	m.Global.Extra["site:antenna"] = json.RawMessage(`"roof mast"`)
	if err := ingest.WriteMeta(ob.capture.MetaPath, m); err != nil {
		t.Fatal(err)
	}
	for pass := 0; pass < 2; pass++ {
		if changed, err := AnnotateFile(ob.capture, ob.capture.MetaPath, events); err != nil || !changed {
			t.Fatalf("pass %d: changed %v, %v", pass, changed, err)
		}
	}
	got := readMeta(t, ob.capture.MetaPath)
	var ours, foreign int
	center, _ := ob.capture.CenterHz()
	for _, a := range got.Annotations {
		if a.Generator == "site logbook" {
			foreign++
			continue
		}
		ours++
		checkSigMFAnnotation(t, a)
		var e *detect.Event
		for i := range events {
			if EventUUID(events[i].ID) == a.UUID {
				e = &events[i]
			}
		}
		if e == nil {
			t.Fatalf("annotation %q matches no event", a.UUID)
		}
		lo, hi := center+e.OffsetHz-e.BandwidthHz/2, center+e.OffsetHz+e.BandwidthHz/2
		if a.SampleStart != uint64(e.SampleStart) || *a.SampleCount != uint64(e.SampleCount) || a.Label != e.Class ||
			a.FreqLowerEdge == nil || *a.FreqLowerEdge != lo || *a.FreqUpperEdge != hi {
			t.Errorf("annotation %+v does not describe event %+v", a, *e)
		}
		// Issue 18 item 10: the standard fields say it in words, the
		// rest is in quietband's namespace (no JSON in core:comment).
		if a.Comment != Detail(*e) || strings.HasPrefix(a.Comment, "{") {
			t.Errorf("comment %q, want the event in words %q", a.Comment, Detail(*e))
		}
		var id string
		var jn float64
		var params detect.Params
		if json.Unmarshal(a.Extra["quietband:event_id"], &id) != nil || id != e.ID ||
			json.Unmarshal(a.Extra["quietband:jn_db"], &jn) != nil || jn != e.JNDB ||
			json.Unmarshal(a.Extra["quietband:params"], &params) != nil {
			t.Errorf("extension keys %v do not carry event %s", a.Extra, e.ID)
		}
	}
	if ours != len(events) || foreign != 1 {
		t.Errorf("%d quietband and %d foreign annotations, want %d and 1", ours, foreign, len(events))
	}
	if string(got.Global.Extra["site:antenna"]) != `"roof mast"` || got.Global.SHA512 != m.Global.SHA512 ||
		got.Global.Datatype != m.Global.Datatype || got.Global.SampleRate != m.Global.SampleRate || len(got.Captures) != len(m.Captures) {
		t.Errorf("other metadata changed: %+v", got.Global)
	}
	// The namespace is declared in core:extensions (SigMF), once.
	var exts []struct{ Name string }
	if err := json.Unmarshal(got.Global.Extra["core:extensions"], &exts); err != nil || len(exts) != 1 || exts[0].Name != "quietband" {
		t.Errorf("core:extensions %s: %v", got.Global.Extra["core:extensions"], err)
	}
	// SigMF: annotations appear in ascending core:sample_start.
	raw, err := os.ReadFile(ob.capture.MetaPath)
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Annotations []struct {
			Start uint64 `json:"core:sample_start"`
		} `json:"annotations"`
	}
	if err := json.Unmarshal(raw, &doc); err != nil {
		t.Fatal(err)
	}
	for i := 1; i < len(doc.Annotations); i++ {
		if doc.Annotations[i].Start < doc.Annotations[i-1].Start {
			t.Errorf("annotations out of order at %d", i)
		}
	}
	if _, err := ingest.Open(ob.capture.MetaPath, ingest.RawSettings{}); err != nil {
		t.Errorf("annotated capture does not open: %v", err)
	}

	// A clean capture without earlier quietband annotations is left alone.
	before, _ := os.ReadFile(obs[0].capture.MetaPath)
	if changed, err := AnnotateFile(obs[0].capture, obs[0].capture.MetaPath, nil); err != nil || changed {
		t.Errorf("clean capture: changed %v, %v", changed, err)
	}
	if after, _ := os.ReadFile(obs[0].capture.MetaPath); !bytes.Equal(before, after) {
		t.Error("clean capture's metadata rewritten")
	}
	// Re-annotating with no events removes quietband's annotations only.
	if _, err := AnnotateFile(ob.capture, ob.capture.MetaPath, nil); err != nil {
		t.Fatal(err)
	}
	if got := readMeta(t, ob.capture.MetaPath); len(got.Annotations) != 1 || got.Annotations[0].Generator != "site logbook" {
		t.Errorf("after clearing: %+v", got.Annotations)
	}
}

// TestAnnotateCopyAndNoCentre: a copy goes to another file and leaves the
// original untouched; without a known centre no frequency edges are
// written (SigMF edges are absolute frequencies).
func TestAnnotateCopyAndNoCentre(t *testing.T) {
	dir := t.TempDir()
	ob := runScenario(t, dir, scenario(4e6, synth.Capture{Name: "tone", DurationS: 0.08, Emitters: []synth.Emitter{
		{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: -400e3, JNDB: 10}}}}}))[0]
	if len(ob.result.Events) == 0 {
		t.Fatal("no events")
	}
	orig, _ := os.ReadFile(ob.capture.MetaPath)
	dst := filepath.Join(t.TempDir(), "annotations", filepath.Base(ob.capture.MetaPath))
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		t.Fatal(err)
	}
	if _, err := AnnotateFile(ob.capture, dst, ob.result.Events); err != nil {
		t.Fatal(err)
	}
	if now, _ := os.ReadFile(ob.capture.MetaPath); !bytes.Equal(orig, now) {
		t.Error("the original metadata changed")
	}
	if got := readMeta(t, dst); len(got.Annotations) != len(ob.result.Events) {
		t.Errorf("copy has %d annotations, want %d", len(got.Annotations), len(ob.result.Events))
	}

	// The same capture with its core:frequency removed.
	m := readMeta(t, ob.capture.MetaPath)
	m.Captures[0].HasFrequency = false
	if err := ingest.WriteMeta(ob.capture.MetaPath, m); err != nil {
		t.Fatal(err)
	}
	c, err := ingest.Open(ob.capture.MetaPath, ingest.RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range Annotations(c, ob.result.Events) {
		if a.FreqLowerEdge != nil || a.FreqUpperEdge != nil {
			t.Errorf("edges without a centre: %v %v", *a.FreqLowerEdge, *a.FreqUpperEdge)
		}
		checkSigMFAnnotation(t, a)
	}
}

// TestEventUUID: RFC 9562 version 8 form, the same for the same id,
// different for different ids.
func TestEventUUID(t *testing.T) {
	ids := []string{"", "3f0c9a1b2c3d4e5f60718293", "3f0c9a1b2c3d4e5f60718294", "x"}
	seen := map[string]string{}
	for _, id := range ids {
		u := EventUUID(id)
		if !uuidV8.MatchString(u) || EventUUID(id) != u {
			t.Errorf("EventUUID(%q) = %q", id, u)
		}
		if o, dup := seen[u]; dup {
			t.Errorf("ids %q and %q share UUID %s", o, id, u)
		}
		seen[u] = id
	}
}
