package eventlog

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
)

// seqDigits is the zero-padded width of the seq in a segment name.
const seqDigits = 12

// splitName splits the base name of the active file into stem and
// extension: events.jsonl → "events", ".jsonl".
func splitName(path string) (dir, stem, ext string) {
	dir, base := filepath.Split(path)
	ext = filepath.Ext(base)
	return filepath.Clean(dir), strings.TrimSuffix(base, ext), ext
}

// SegmentName returns the name a rotated segment of the log at path gets
// when its first record has seq first: <stem>.<first, 12 digits><ext> in
// the same directory, e.g. events.jsonl, 1 → events.000000000001.jsonl.
// Zero padding makes the names sort in seq order.
func SegmentName(path string, first uint64) string {
	dir, stem, ext := splitName(path)
	return filepath.Join(dir, fmt.Sprintf("%s.%0*d%s", stem, seqDigits, first, ext))
}

// segmentSeq returns the first seq encoded in the base name of a rotated
// segment of the log whose stem and extension are given, and whether name
// is such a segment at all. Only the canonical spelling (at least 12
// digits, no extra leading zeros) counts.
func segmentSeq(name, stem, ext string) (uint64, bool) {
	mid, ok := strings.CutPrefix(name, stem+".")
	if !ok {
		return 0, false
	}
	mid, ok = strings.CutSuffix(mid, ext)
	if !ok || len(mid) < seqDigits {
		return 0, false
	}
	for i := 0; i < len(mid); i++ {
		if mid[i] < '0' || mid[i] > '9' {
			return 0, false
		}
	}
	n, err := strconv.ParseUint(mid, 10, 64)
	if err != nil || n == 0 || fmt.Sprintf("%0*d", seqDigits, n) != mid {
		return 0, false
	}
	return n, true
}

// Segments returns the files of the log whose active file is path: the
// rotated segments, and the files set aside as damaged (DamagedName),
// ordered by their first seq (oldest first), then the active file if it
// exists. That is the order Verify and NewReader expect.
func Segments(path string) ([]string, error) {
	segs, err := rotated(path)
	if err != nil {
		return nil, err
	}
	names := make([]string, 0, len(segs)+1)
	for _, s := range segs {
		names = append(names, s.path)
	}
	switch _, err := os.Stat(path); {
	case err == nil:
		names = append(names, path)
	case !errors.Is(err, fs.ErrNotExist):
		return nil, fmt.Errorf("eventlog: %w", err)
	}
	return names, nil
}

type segment struct {
	path    string
	first   uint64
	damaged bool // set aside because it failed verification (DamagedName)
}

// rotated lists the rotated segments of the log at path, with the files
// set aside as damaged in their place by first seq, oldest first.
func rotated(path string) ([]segment, error) {
	dir, stem, ext := splitName(path)
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("eventlog: listing segments: %w", err)
	}
	var segs []segment
	for _, e := range ents {
		if !e.Type().IsRegular() {
			continue
		}
		if n, ok := segmentSeq(e.Name(), stem, ext); ok {
			segs = append(segs, segment{path: filepath.Join(dir, e.Name()), first: n})
		} else if n, ok := damagedSeq(e.Name(), stem+ext); ok {
			segs = append(segs, segment{path: filepath.Join(dir, e.Name()), first: n, damaged: true})
		}
	}
	slices.SortFunc(segs, func(a, b segment) int {
		switch {
		case a.first < b.first:
			return -1
		case a.first > b.first:
			return 1
		}
		return 0
	})
	return segs, nil
}
