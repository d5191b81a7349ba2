package ingest

import (
	"bufio"
	"crypto/sha512"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"os"
	"path/filepath"
	"time"
)

// Writer streams samples into a capture file: a raw file, or the data file
// of a SigMF pair whose metadata (with core:sha512) is written and renamed
// into place only on Close, after the data is synced, so a watcher that
// waits for the metadata never sees a half-written recording. Complex
// formats take Write, real ones WriteReal.
type Writer struct {
	f       *os.File
	bw      *bufio.Writer
	format  Format
	buf     []byte
	sha     hash.Hash
	samples int64
	clipped int64
	meta    *Meta // nil for raw files
	metaOut string
	closed  bool
}

// SigMFHeader describes a SigMF recording about to be written.
type SigMFHeader struct {
	Format      Format
	SampleRate  float64
	CenterHz    float64
	HasCenter   bool
	Start       time.Time // zero: no core:datetime
	Description string
	Author      string
	HW          string
	Annotations []Annotation
	// IF is required for a real format: written as quietband:if_hz and
	// quietband:lo_side, with the namespace declared in core:extensions
	// (see KeyIFHz). SampleRate is then the file's rate and CenterHz the
	// RF of the IF band's centre.
	IF IFConversion
}

// CreateSigMF starts a SigMF recording at base (base.sigmf-data now,
// base.sigmf-meta at Close).
func CreateSigMF(base string, h SigMFHeader) (*Writer, error) {
	if !h.Format.Valid() {
		return nil, errors.New("ingest: CreateSigMF: invalid format")
	}
	if !(h.SampleRate > 0 && h.SampleRate <= MaxSampleRate) {
		return nil, fmt.Errorf("%s%s: sample rate %g out of range", base, MetaExt, h.SampleRate)
	}
	var extra map[string]json.RawMessage
	if h.Format.IsReal() {
		if err := h.IF.Check(h.SampleRate); err != nil {
			return nil, fmt.Errorf("%s%s: %s: %w", base, MetaExt, h.Format, err)
		}
		extra = map[string]json.RawMessage{}
		put(extra, KeyIFHz, h.IF.IFHz)
		put(extra, KeyLOSide, h.IF.Side.String())
		put(extra, "core:extensions", []map[string]any{{"name": ExtensionName, "version": ExtensionVersion, "optional": true}})
	}
	w, err := newWriter(base+DataExt, h.Format)
	if err != nil {
		return nil, err
	}
	seg := CaptureSegment{SampleStart: 0, Frequency: h.CenterHz, HasFrequency: h.HasCenter, Datetime: h.Start}
	w.meta = &Meta{
		Global: Global{Datatype: h.Format.String(), Version: SigMFVersion, SampleRate: h.SampleRate,
			Description: h.Description, Author: h.Author, HW: h.HW, Recorder: "quietband", Extra: extra},
		Captures:    []CaptureSegment{seg},
		Annotations: h.Annotations,
	}
	w.metaOut = base + MetaExt
	return w, nil
}

// CreateRaw starts a raw capture file in format f.
func CreateRaw(path string, f Format) (*Writer, error) {
	if !f.Valid() {
		return nil, errors.New("ingest: CreateRaw: invalid format")
	}
	return newWriter(path, f)
}

func newWriter(path string, f Format) (*Writer, error) {
	file, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return nil, err
	}
	return &Writer{f: file, bw: bufio.NewWriterSize(file, 1<<16), format: f, sha: sha512.New()}, nil
}

// Write encodes and appends complex samples. Values beyond full scale are
// saturated and counted (Clipped), never wrapped.
func (w *Writer) Write(samples []complex64) error {
	if w.closed {
		return errors.New("ingest: write to closed Writer")
	}
	if w.format.IsReal() {
		return fmt.Errorf("ingest: Write of complex samples to a %s file (use WriteReal)", w.format)
	}
	need := len(samples) * w.format.SampleBytes()
	if cap(w.buf) < need {
		w.buf = make([]byte, need)
	}
	b := w.buf[:need]
	w.clipped += int64(w.format.Encode(b, samples))
	w.sha.Write(b)
	w.samples += int64(len(samples))
	_, err := w.bw.Write(b)
	return err
}

// WriteReal encodes and appends real samples to a file of a real format,
// as Write does for complex ones.
func (w *Writer) WriteReal(values []float32) error {
	if w.closed {
		return errors.New("ingest: write to closed Writer")
	}
	if !w.format.IsReal() {
		return fmt.Errorf("ingest: WriteReal to a %s file (use Write)", w.format)
	}
	need := len(values) * w.format.SampleBytes()
	if cap(w.buf) < need {
		w.buf = make([]byte, need)
	}
	b := w.buf[:need]
	w.clipped += int64(w.format.EncodeReal(b, values))
	w.sha.Write(b)
	w.samples += int64(len(values))
	_, err := w.bw.Write(b)
	return err
}

// Samples is the number of samples written so far (real values for a real
// format).
func (w *Writer) Samples() int64 { return w.samples }

// Clipped is the number of samples saturated so far.
func (w *Writer) Clipped() int64 { return w.clipped }

// DataPath is the file the samples go to.
func (w *Writer) DataPath() string { return w.f.Name() }

// Close flushes and syncs the data and, for SigMF, writes the metadata with
// the data's SHA-512 through a temporary file renamed into place.
func (w *Writer) Close() error {
	if w.closed {
		return nil
	}
	w.closed = true
	err := w.bw.Flush()
	if err == nil {
		err = w.f.Sync()
	}
	if cerr := w.f.Close(); err == nil {
		err = cerr
	}
	if err != nil || w.meta == nil {
		return err
	}
	w.meta.Global.SHA512 = hex.EncodeToString(w.sha.Sum(nil))
	return WriteMeta(w.metaOut, w.meta)
}

// WriteMeta writes m to path atomically: a temporary file in the same
// folder, synced, renamed over path, and the folder synced.
func WriteMeta(path string, m *Meta) error {
	body, err := m.MarshalJSON()
	if err != nil {
		return err
	}
	return WriteFileAtomic(path, append(body, '\n'))
}

// WriteFileAtomic replaces path with data so that a reader sees either the
// old file or the whole new one, durable once it returns.
func WriteFileAtomic(path string, data []byte) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	_, err = tmp.Write(data)
	if err == nil {
		err = tmp.Sync()
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp.Name(), 0o644)
	}
	if err == nil {
		err = os.Rename(tmp.Name(), path)
	}
	if err != nil {
		os.Remove(tmp.Name())
		return err
	}
	return SyncDir(dir)
}

// SyncDir fsyncs a directory so that a file created, renamed or removed in
// it survives a crash (the one definition: captures, the event log, the
// baseline and moved files all use it).
func SyncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("syncing directory %s: %w", dir, err)
	}
	err = d.Sync()
	if cerr := d.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("syncing directory %s: %w", dir, err)
	}
	return nil
}
