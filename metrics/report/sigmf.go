package report

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"strings"

	"quietband/detect"
	"quietband/ingest"
)

// Generator is the core:generator of the annotations quietband writes.
const Generator = "quietband " + detect.Version

// generatorPrefix marks quietband's annotations of any version; they are
// the ones a new annotation pass replaces.
const generatorPrefix = "quietband "

// MaxLabel is the longest core:label written: SigMF recommends labels of
// at most 20 characters.
const MaxLabel = 20

// Annotations turns a capture's events into SigMF annotations:
// core:sample_start and core:sample_count from the event, core:label the
// class, core:generator Generator, core:uuid derived from the event id
// (EventUUID), core:comment the event in words (Detail), and
// core:freq_lower_edge / core:freq_upper_edge as absolute frequencies,
// centre + offset ∓ bandwidth/2, using the centre of the capture segment
// holding the event's first sample. SigMF defines the edges as absolute
// frequencies, so where that centre is unknown neither edge is written.
// The rest of the event is in keys of quietband's namespace
// (quietband:event_id, quietband:episode, quietband:offset_hz, ...; see
// extensionKeys), which Annotate declares in the global core:extensions as
// SigMF requires (issue 18 item 10: a JSON blob in core:comment).
func Annotations(c *ingest.Capture, events []detect.Event) []ingest.Annotation {
	out := make([]ingest.Annotation, 0, len(events))
	for _, e := range events {
		a := ingest.Annotation{SampleStart: uint64(max(e.SampleStart, 0)), Label: truncate(e.Class, MaxLabel),
			Generator: Generator, UUID: EventUUID(e.ID), Comment: Detail(e), Extra: extensionKeys(e)}
		n := uint64(max(e.SampleCount, 0))
		a.SampleCount = &n
		if seg := c.SegmentAt(e.SampleStart); seg.HasCenter {
			lo, hi := FreqEdges(e, seg.CenterHz)
			a.FreqLowerEdge, a.FreqUpperEdge = &lo, &hi
		}
		out = append(out, a)
	}
	return out
}

func truncate(s string, n int) string {
	r := []rune(s)
	if len(r) > n {
		return string(r[:n])
	}
	return s
}

// extensionKeys are the event's fields that SigMF's core annotation keys
// do not hold, under quietband's namespace with the event log's names:
// quietband:event_id, :episode, :class, :offset_hz, :bandwidth_hz,
// :jn_db (not for a cn0_drop, which has no J/N), :power_dbfs, :params,
// :impact, :detectors, :related.
func extensionKeys(e detect.Event) map[string]json.RawMessage {
	out := map[string]json.RawMessage{}
	put := func(k string, v any) {
		b, err := json.Marshal(v)
		if err != nil {
			panic("report: marshal of an annotation key: " + err.Error())
		}
		out[ingest.ExtensionName+":"+k] = b
	}
	put("event_id", e.ID)
	put("episode", e.Episode)
	put("class", e.Class)
	put("offset_hz", e.OffsetHz)
	put("bandwidth_hz", e.BandwidthHz)
	if jn, ok := JN(e); ok {
		put("jn_db", jn)
	}
	put("power_dbfs", e.PowerDBFS)
	put("params", e.Params)
	if e.Impact != nil {
		put("impact", e.Impact)
	}
	put("detectors", e.Detectors)
	if len(e.Related) > 0 {
		put("related", e.Related)
	}
	return out
}

// declareExtension adds quietband's namespace to the global
// core:extensions of m (SigMF: every namespace used is declared there),
// keeping every other declared extension.
func declareExtension(m *ingest.Meta) error {
	var exts []map[string]any
	if raw, ok := m.Global.Extra["core:extensions"]; ok {
		if err := json.Unmarshal(raw, &exts); err != nil {
			return fmt.Errorf("core:extensions: %w", err)
		}
	}
	for _, x := range exts {
		if x["name"] == ingest.ExtensionName {
			return nil
		}
	}
	exts = append(exts, map[string]any{"name": ingest.ExtensionName, "version": ingest.ExtensionVersion, "optional": true})
	b, err := json.Marshal(exts)
	if err != nil {
		return err
	}
	extra := make(map[string]json.RawMessage, len(m.Global.Extra)+1)
	for k, v := range m.Global.Extra {
		extra[k] = v
	}
	extra["core:extensions"] = b
	m.Global.Extra = extra
	return nil
}

// EventUUID is a UUID version 8 (RFC 9562 §5.8, custom) made from an
// event id: the first 16 bytes of SHA-256("quietband event " + id) with
// the version nibble set to 8 and the variant bits to 10. The same event
// always gets the same UUID.
func EventUUID(id string) string {
	h := sha256.Sum256([]byte("quietband event " + id))
	b := h[:16]
	b[6] = b[6]&0x0f | 0x80
	b[8] = b[8]&0x3f | 0x80
	x := hex.EncodeToString(b)
	return x[0:8] + "-" + x[8:12] + "-" + x[12:16] + "-" + x[16:20] + "-" + x[20:32]
}

// Annotate returns a copy of m in which the annotations an earlier
// quietband pass wrote (core:generator starting with "quietband ") are
// replaced by anns; every other annotation and every other key is kept.
func Annotate(m *ingest.Meta, anns []ingest.Annotation) *ingest.Meta {
	out := *m
	out.Annotations = nil
	for _, a := range m.Annotations {
		if !strings.HasPrefix(a.Generator, generatorPrefix) {
			out.Annotations = append(out.Annotations, a)
		}
	}
	out.Annotations = append(out.Annotations, anns...)
	if len(anns) > 0 {
		if err := declareExtension(&out); err != nil {
			// A malformed core:extensions is the file's own: kept as it is.
			return &out
		}
	}
	return &out
}

// quietbandAnnotations counts m's annotations written by quietband.
func quietbandAnnotations(m *ingest.Meta) int {
	n := 0
	for _, a := range m.Annotations {
		if strings.HasPrefix(a.Generator, generatorPrefix) {
			n++
		}
	}
	return n
}

// AnnotateFile reads the SigMF metadata of capture c as it is on disk now,
// replaces its quietband annotations with those of events and writes the
// result to dst atomically (ingest.WriteMeta); dst may be c.MetaPath
// itself (in place). It writes nothing and returns false when there is
// nothing to change: no events and no earlier quietband annotations.
func AnnotateFile(c *ingest.Capture, dst string, events []detect.Event) (bool, error) {
	if c.MetaPath == "" {
		return false, fmt.Errorf("%s: a raw capture has no SigMF metadata to annotate", c.DataPath)
	}
	f, err := os.Open(c.MetaPath)
	if err != nil {
		return false, err
	}
	m, err := ingest.ParseMeta(f)
	f.Close()
	if err != nil {
		return false, fmt.Errorf("%s: %w", c.MetaPath, err)
	}
	if len(events) == 0 && quietbandAnnotations(m) == 0 {
		return false, nil
	}
	if err := ingest.WriteMeta(dst, Annotate(m, Annotations(c, events))); err != nil {
		return false, fmt.Errorf("%s: %w", dst, err)
	}
	return true, nil
}
