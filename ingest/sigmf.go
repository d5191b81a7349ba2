package ingest

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"regexp"
	"sort"
	"strings"
	"time"
)

// SigMFVersion is the SigMF specification version quietband writes.
const SigMFVersion = "1.2.6"

// Extensions of a SigMF recording's two files (SigMF "Files" rules).
const (
	MetaExt = ".sigmf-meta"
	DataExt = ".sigmf-data"
)

// MaxSampleRate is the largest sample rate quietband accepts (the SigMF
// schema allows up to 1e12; no GNSS front end comes near 10 GS/s).
const MaxSampleRate = 10e9

// maxMetaBytes bounds how much metadata JSON is read: a recording's
// metadata is kilobytes; anything past this is refused, not parsed.
const maxMetaBytes = 16 << 20

// Meta is a SigMF metadata document (one recording). The core fields
// quietband uses are typed; every other key, including other namespaces, is
// kept verbatim in Extra so a rewrite preserves it.
type Meta struct {
	Global      Global
	Captures    []CaptureSegment
	Annotations []Annotation
	// ReadingSHA256 is the SHA-256 of how the samples are read (the
	// global object and the captures array; see readingSHA256), set by
	// ParseMeta.
	ReadingSHA256 string
}

// Global is the SigMF "global" object.
type Global struct {
	Datatype    string  // core:datatype
	Version     string  // core:version
	SampleRate  float64 // core:sample_rate (0 when absent)
	NumChannels int     // core:num_channels (0 when absent, meaning 1)
	SHA512      string  // core:sha512 of the dataset file
	Offset      uint64  // core:offset
	Description string  // core:description
	Author      string  // core:author
	HW          string  // core:hw
	Recorder    string  // core:recorder
	Extra       map[string]json.RawMessage
}

// CaptureSegment is one entry of the SigMF "captures" array: the values
// apply from SampleStart until the next segment.
type CaptureSegment struct {
	SampleStart uint64    // core:sample_start
	Frequency   float64   // core:frequency, Hz; valid when HasFrequency
	Datetime    time.Time // core:datetime; zero when absent
	HeaderBytes uint64    // core:header_bytes
	// HasFrequency tells a centre frequency of 0 Hz from none given.
	HasFrequency bool
	Extra        map[string]json.RawMessage
}

// Annotation is one entry of the SigMF "annotations" array.
type Annotation struct {
	SampleStart   uint64   // core:sample_start
	SampleCount   *uint64  // core:sample_count
	FreqLowerEdge *float64 // core:freq_lower_edge
	FreqUpperEdge *float64 // core:freq_upper_edge
	Label         string   // core:label
	Comment       string   // core:comment
	Generator     string   // core:generator
	UUID          string   // core:uuid
	Extra         map[string]json.RawMessage
}

// MetadataSHA256 is the ReadingSHA256 of the capture's SigMF metadata
// (how its samples are read): part of the capture's identity (issue 17,
// item 7). "" for a raw file.
func (c *Capture) MetadataSHA256() string {
	if c.Meta == nil {
		return ""
	}
	return c.Meta.ReadingSHA256
}

// readingSHA256 is the lowercase hex SHA-256 (FIPS 180-4) of the global
// object and the captures array as JSON without insignificant whitespace
// (RFC 8259, section 2; json.Compact), joined by a newline: what says how
// the samples are read, and so what a corrected metadata file changes
// (issue 17, item 7). The annotations are left out (they say what was
// found, and an annotated copy of the file reads the same samples), as is
// the layout of the file (a rewrite with other indentation changes
// nothing).
func readingSHA256(global, captures json.RawMessage) string {
	var b bytes.Buffer
	if json.Compact(&b, global) != nil {
		b.Reset()
		b.Write(global)
	}
	b.WriteByte('\n')
	if n := b.Len(); json.Compact(&b, captures) != nil {
		b.Truncate(n)
		b.Write(captures)
	}
	sum := sha256.Sum256(b.Bytes())
	return hex.EncodeToString(sum[:])
}

// versionPattern is the core:version format of the SigMF schema (X.Y.Z).
var versionPattern = regexp.MustCompile(`^1\.\d+\.\d+$`)

// ParseMeta reads and validates a SigMF metadata document. Errors say what
// is wrong in the words of the SigMF field names; the caller adds the file
// name.
func ParseMeta(r io.Reader) (*Meta, error) {
	raw, err := io.ReadAll(io.LimitReader(r, maxMetaBytes+1))
	if err != nil {
		return nil, err
	}
	if len(raw) == 0 {
		return nil, errors.New("metadata file is empty")
	}
	if len(raw) > maxMetaBytes {
		return nil, fmt.Errorf("metadata is larger than %d MiB; refusing to parse", maxMetaBytes>>20)
	}
	var top map[string]json.RawMessage
	if err := json.Unmarshal(raw, &top); err != nil {
		return nil, fmt.Errorf("malformed JSON: %w", describeJSONError(raw, err))
	}
	m := &Meta{}
	g, ok := top["global"]
	if !ok {
		return nil, errors.New(`missing the "global" object`)
	}
	m.ReadingSHA256 = readingSHA256(g, top["captures"])
	if err := m.Global.decode(g); err != nil {
		return nil, err
	}
	if c, ok := top["captures"]; ok {
		var segs []map[string]json.RawMessage
		if err := json.Unmarshal(c, &segs); err != nil {
			return nil, fmt.Errorf(`"captures" must be an array of objects: %w`, err)
		}
		for i, s := range segs {
			var seg CaptureSegment
			if err := seg.decode(s); err != nil {
				return nil, fmt.Errorf("captures[%d]: %w", i, err)
			}
			if i > 0 && seg.SampleStart <= m.Captures[i-1].SampleStart {
				return nil, fmt.Errorf("captures[%d]: core:sample_start %d is not after the previous segment's %d (SigMF requires ascending order)", i, seg.SampleStart, m.Captures[i-1].SampleStart)
			}
			m.Captures = append(m.Captures, seg)
		}
	} else {
		return nil, errors.New(`missing the "captures" array`)
	}
	if a, ok := top["annotations"]; ok {
		var anns []map[string]json.RawMessage
		if err := json.Unmarshal(a, &anns); err != nil {
			return nil, fmt.Errorf(`"annotations" must be an array of objects: %w`, err)
		}
		for i, s := range anns {
			var an Annotation
			if err := an.decode(s); err != nil {
				return nil, fmt.Errorf("annotations[%d]: %w", i, err)
			}
			m.Annotations = append(m.Annotations, an)
		}
	}
	return m, nil
}

// describeJSONError adds the line and column of a syntax error.
func describeJSONError(raw []byte, err error) error {
	var se *json.SyntaxError
	if errors.As(err, &se) {
		// Offset counts the bytes read, the offending one included.
		pos := max(se.Offset-1, 0)
		line := 1 + bytes.Count(raw[:pos], []byte("\n"))
		col := pos - int64(bytes.LastIndexByte(raw[:pos], '\n'))
		return fmt.Errorf("line %d column %d: %w", line, col, err)
	}
	return err
}

func takeString(m map[string]json.RawMessage, key string, dst *string) error {
	v, ok := m[key]
	if !ok {
		return nil
	}
	delete(m, key)
	if err := json.Unmarshal(v, dst); err != nil {
		return fmt.Errorf("%s must be a string", key)
	}
	return nil
}

func takeFloat(m map[string]json.RawMessage, key string, dst *float64) (bool, error) {
	v, ok := m[key]
	if !ok {
		return false, nil
	}
	delete(m, key)
	if err := json.Unmarshal(v, dst); err != nil {
		return false, fmt.Errorf("%s must be a number, got %s", key, clip(v))
	}
	return true, nil
}

func takeUint(m map[string]json.RawMessage, key string, dst *uint64) (bool, error) {
	v, ok := m[key]
	if !ok {
		return false, nil
	}
	delete(m, key)
	var f float64
	if err := json.Unmarshal(v, &f); err != nil {
		return false, fmt.Errorf("%s must be a non-negative integer, got %s", key, clip(v))
	}
	if f < 0 || f != math.Trunc(f) || f > 1<<62 {
		return false, fmt.Errorf("%s must be a non-negative integer, got %s", key, clip(v))
	}
	*dst = uint64(f)
	return true, nil
}

func clip(v json.RawMessage) string {
	s := string(v)
	if len(s) > 40 {
		s = s[:40] + "…"
	}
	return s
}

func (g *Global) decode(raw json.RawMessage) error {
	var m map[string]json.RawMessage
	if err := json.Unmarshal(raw, &m); err != nil {
		return errors.New(`"global" must be an object`)
	}
	if err := takeString(m, "core:datatype", &g.Datatype); err != nil {
		return err
	}
	if g.Datatype == "" {
		return errors.New("global core:datatype is missing (SigMF requires it)")
	}
	if err := takeString(m, "core:version", &g.Version); err != nil {
		return err
	}
	if g.Version == "" {
		return errors.New("global core:version is missing (SigMF requires it)")
	}
	if !versionPattern.MatchString(g.Version) {
		return fmt.Errorf("global core:version %q is not a SigMF 1.x.y version", g.Version)
	}
	has, err := takeFloat(m, "core:sample_rate", &g.SampleRate)
	if err != nil {
		return err
	}
	if has && !(g.SampleRate > 0 && g.SampleRate <= MaxSampleRate) {
		return fmt.Errorf("global core:sample_rate %g is out of range (must be > 0 and ≤ %g)", g.SampleRate, MaxSampleRate)
	}
	var nc uint64
	if _, err := takeUint(m, "core:num_channels", &nc); err != nil {
		return err
	}
	if nc > 1 {
		return fmt.Errorf("global core:num_channels is %d; quietband analyses single-channel recordings (split multi-channel ones into a SigMF collection)", nc)
	}
	g.NumChannels = int(nc)
	if _, err := takeUint(m, "core:offset", &g.Offset); err != nil {
		return err
	}
	for key, dst := range map[string]*string{"core:sha512": &g.SHA512, "core:description": &g.Description,
		"core:author": &g.Author, "core:hw": &g.HW, "core:recorder": &g.Recorder} {
		if err := takeString(m, key, dst); err != nil {
			return err
		}
	}
	if _, ok := m["core:dataset"]; ok {
		return errors.New("global core:dataset names a non-conforming dataset; quietband reads only .sigmf-data files")
	}
	g.Extra = m
	return nil
}

func (s *CaptureSegment) decode(m map[string]json.RawMessage) error {
	has, err := takeUint(m, "core:sample_start", &s.SampleStart)
	if err != nil {
		return err
	}
	if !has {
		return errors.New("core:sample_start is missing (SigMF requires it)")
	}
	if s.HasFrequency, err = takeFloat(m, "core:frequency", &s.Frequency); err != nil {
		return err
	}
	if s.HasFrequency && math.Abs(s.Frequency) > 1e12 {
		return fmt.Errorf("core:frequency %g is out of range", s.Frequency)
	}
	var dt string
	if err := takeString(m, "core:datetime", &dt); err != nil {
		return err
	}
	if dt != "" {
		t, err := ParseDatetime(dt)
		if err != nil {
			return err
		}
		s.Datetime = t
	}
	if _, err := takeUint(m, "core:header_bytes", &s.HeaderBytes); err != nil {
		return err
	}
	if s.HeaderBytes != 0 {
		return errors.New("core:header_bytes is only allowed for non-conforming datasets")
	}
	s.Extra = m
	return nil
}

// ParseDatetime parses a SigMF core:datetime: RFC 3339 with a literal "Z"
// as the only allowed offset, any number of fractional digits.
func ParseDatetime(s string) (time.Time, error) {
	if !strings.HasSuffix(s, "Z") {
		return time.Time{}, fmt.Errorf("core:datetime %q must be UTC with a Z suffix (SigMF)", s)
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, fmt.Errorf("core:datetime %q is not RFC 3339", s)
	}
	return t.UTC(), nil
}

func (a *Annotation) decode(m map[string]json.RawMessage) error {
	has, err := takeUint(m, "core:sample_start", &a.SampleStart)
	if err != nil {
		return err
	}
	if !has {
		return errors.New("core:sample_start is missing (SigMF requires it)")
	}
	var n uint64
	if has, err := takeUint(m, "core:sample_count", &n); err != nil {
		return err
	} else if has {
		a.SampleCount = &n
	}
	var lo, hi float64
	hasLo, err := takeFloat(m, "core:freq_lower_edge", &lo)
	if err != nil {
		return err
	}
	hasHi, err := takeFloat(m, "core:freq_upper_edge", &hi)
	if err != nil {
		return err
	}
	if hasLo != hasHi {
		return errors.New("core:freq_lower_edge and core:freq_upper_edge must be given together (SigMF)")
	}
	if hasLo {
		if lo > hi {
			return fmt.Errorf("core:freq_lower_edge %g is above core:freq_upper_edge %g", lo, hi)
		}
		a.FreqLowerEdge, a.FreqUpperEdge = &lo, &hi
	}
	for key, dst := range map[string]*string{"core:label": &a.Label, "core:comment": &a.Comment,
		"core:generator": &a.Generator, "core:uuid": &a.UUID} {
		if err := takeString(m, key, dst); err != nil {
			return err
		}
	}
	a.Extra = m
	return nil
}

// MarshalJSON writes m as a SigMF metadata document with sorted keys (the
// core fields merged with the preserved extra ones), indented for people.
func (m *Meta) MarshalJSON() ([]byte, error) {
	g := cloneExtra(m.Global.Extra)
	put(g, "core:datatype", m.Global.Datatype)
	put(g, "core:version", m.Global.Version)
	if m.Global.SampleRate > 0 {
		put(g, "core:sample_rate", m.Global.SampleRate)
	}
	if m.Global.NumChannels > 0 {
		put(g, "core:num_channels", m.Global.NumChannels)
	}
	if m.Global.Offset > 0 {
		put(g, "core:offset", m.Global.Offset)
	}
	for k, v := range map[string]string{"core:sha512": m.Global.SHA512, "core:description": m.Global.Description,
		"core:author": m.Global.Author, "core:hw": m.Global.HW, "core:recorder": m.Global.Recorder} {
		if v != "" {
			put(g, k, v)
		}
	}
	caps := make([]map[string]json.RawMessage, 0, len(m.Captures))
	for _, s := range m.Captures {
		c := cloneExtra(s.Extra)
		put(c, "core:sample_start", s.SampleStart)
		if s.HasFrequency {
			put(c, "core:frequency", s.Frequency)
		}
		if !s.Datetime.IsZero() {
			put(c, "core:datetime", FormatDatetime(s.Datetime))
		}
		caps = append(caps, c)
	}
	anns := make([]map[string]json.RawMessage, 0, len(m.Annotations))
	sorted := append([]Annotation(nil), m.Annotations...)
	sort.SliceStable(sorted, func(i, j int) bool { return sorted[i].SampleStart < sorted[j].SampleStart })
	for _, a := range sorted {
		c := cloneExtra(a.Extra)
		put(c, "core:sample_start", a.SampleStart)
		if a.SampleCount != nil {
			put(c, "core:sample_count", *a.SampleCount)
		}
		if a.FreqLowerEdge != nil && a.FreqUpperEdge != nil {
			put(c, "core:freq_lower_edge", *a.FreqLowerEdge)
			put(c, "core:freq_upper_edge", *a.FreqUpperEdge)
		}
		for k, v := range map[string]string{"core:label": a.Label, "core:comment": a.Comment,
			"core:generator": a.Generator, "core:uuid": a.UUID} {
			if v != "" {
				put(c, k, v)
			}
		}
		anns = append(anns, c)
	}
	doc := map[string]any{"global": g, "captures": caps, "annotations": anns}
	return json.MarshalIndent(doc, "", "  ")
}

// FormatDatetime formats t as a SigMF core:datetime (UTC, Z, nanoseconds
// without trailing zeros).
func FormatDatetime(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

func cloneExtra(m map[string]json.RawMessage) map[string]json.RawMessage {
	out := make(map[string]json.RawMessage, len(m)+8)
	for k, v := range m {
		out[k] = v
	}
	return out
}

func put(m map[string]json.RawMessage, key string, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		panic("ingest: marshal of core field: " + err.Error())
	}
	m[key] = b
}
