package eventlog

import (
	"bytes"
	"errors"
	"os"
	"strconv"
	"strings"
	"testing"
)

// TestSetAsideDamaged (issue 17, item 8): one byte of the log edited in
// place. Without SetAsideDamaged Open refuses, as before; with it the
// damaged file is set aside byte for byte, a new active file starts with a
// break record carrying the last good seq and hash (the chain rule of FIPS
// 180-4 SHA-256 over the stored line, as in doc.go), seqs are not used
// twice, Verify names the damaged file and line, VerifyResumed passes from
// the break on, and the Log appends and reopens.
func TestSetAsideDamaged(t *testing.T) {
	for _, c := range []struct {
		name     string
		maxBytes int64
		// damage edits the log's files; it returns the file it damaged.
		damage func(t *testing.T, path string) string
		// lastGood is the seq of the last record that verifies; badLine
		// the line Verify names in the damaged file.
		lastGood uint64
		badLine  int
		highest  uint64 // highest seq any line of the damaged file shows
	}{
		{name: "digit changed in line 3 of 6", damage: func(t *testing.T, p string) string {
			editLine(t, p, 3, func(l []byte) { l[bytes.LastIndexByte(l, '}')-1] ^= 1 })
			return p
		}, lastGood: 2, badLine: 4, highest: 6}, // line 3 or line 4's prev changed: 2 is the last beyond doubt
		{name: "brace broken in line 3 of 6", damage: func(t *testing.T, p string) string {
			editLine(t, p, 3, func(l []byte) { l[0] = 'x' })
			return p
		}, lastGood: 2, badLine: 3, highest: 6},
		{name: "line 1 of 6 changed", damage: func(t *testing.T, p string) string {
			editLine(t, p, 1, func(l []byte) { l[bytes.LastIndexByte(l, '}')-1] ^= 1 })
			return p
		}, lastGood: 0, badLine: 2, highest: 6},
		{name: "newest segment damaged, active file empty", maxBytes: 1, damage: func(t *testing.T, p string) string {
			segs := segments(t, p)
			// Every record rotates into a segment of its own at MaxBytes 1;
			// the active file holds the sixth. Empty it as after a
			// rotation, then break the fifth's JSON (a one-line file's
			// prev is checked only against the file before it).
			writeFile(t, p, nil)
			seg := segs[len(segs)-2]
			editLine(t, seg, 1, func(l []byte) { l[0] = 'x' })
			return seg
		}, lastGood: 4, badLine: 1, highest: 5},
	} {
		t.Run(c.name, func(t *testing.T) {
			path := tempLog(t)
			l := openLog(t, path, Options{MaxBytes: c.maxBytes})
			fill(t, l, 6)
			l.Close()
			bad := c.damage(t, path)
			before := readFile(t, bad)
			var want string // SHA-256 of the last good line
			if c.lastGood == 0 {
				want = zeroHash
			} else {
				Scan(path, func(r Record) error {
					if r.Seq == c.lastGood {
						want = sha(r.Line)
					}
					return nil
				})
			}

			if _, err := Open(path, Options{MaxBytes: c.maxBytes}); err == nil || damageOf(err) == nil {
				t.Fatalf("Open without SetAsideDamaged: %v; want the refusal naming the damage", err)
			}
			var logs bytes.Buffer
			l, err := Open(path, Options{MaxBytes: c.maxBytes, SetAsideDamaged: true, Logger: logBuffer(&logs)})
			if err != nil {
				t.Fatalf("Open with SetAsideDamaged: %v", err)
			}
			defer l.Close()
			first := uint64(1) // the active file's first seq
			if c.maxBytes == 1 {
				first = 5
			}
			aside := DamagedName(path, first)
			if got, err := os.ReadFile(aside); err != nil || !bytes.Equal(got, before) {
				t.Fatalf("damaged file not set aside untouched as %s: %v", aside, err)
			}
			if d, _ := Damaged(path); len(d) != 1 || d[0] != aside {
				t.Errorf("Damaged = %v, want [%s]", d, aside)
			}
			if l.LastSeq() != c.highest+1 || l.Breaks() != 1 {
				t.Errorf("LastSeq %d, Breaks %d; want the break record at seq %d, 1 break", l.LastSeq(), l.Breaks(), c.highest+1)
			}
			if !strings.Contains(logs.String(), "failed verification") {
				t.Errorf("no error log line about the damage: %s", logs.String())
			}
			recs := splitLines(readFile(t, path))
			if len(recs) != 1 {
				t.Fatalf("new active file has %d lines, want the break record", len(recs))
			}
			var b struct {
				Kind string `json:"kind"`
				Seq  uint64 `json:"seq"`
				Prev string `json:"prev"`
				Break
			}
			if err := (Record{Line: recs[0]}).Decode(&b); err != nil {
				t.Fatal(err)
			}
			// On the wire a quarantined capture record (the contract's
			// kinds), marked log_break.
			if b.Kind != KindCapture || !b.LogBreak || b.Status != "quarantined" || !strings.Contains(b.Error, b.DamagedFile) || b.Prev != want || b.LastGoodHash != want || b.LastGoodSeq != c.lastGood ||
				b.DamagedLine != c.badLine || b.DamagedFile != "events.jsonl.damaged-"+strconv.FormatUint(first, 10) {
				t.Errorf("break record %s; want prev = last_good_hash = %s, last_good_seq %d, damaged line %d", recs[0], want, c.lastGood, c.badLine)
			}

			r, err := l.Append(KindCapture, testCapture{Capture: "after"})
			if err != nil || r.Seq != c.highest+2 {
				t.Fatalf("append after the break: seq %d, %v", r.Seq, err)
			}
			if err := l.Reopen(); err != nil {
				t.Fatalf("Reopen after the break: %v", err)
			}
			_, err = Verify(segments(t, path)...)
			var ve *VerifyError
			if !errors.As(err, &ve) || ve.File != aside || ve.Line != c.badLine {
				t.Errorf("Verify: %v; want the damage named at %s:%d", err, aside, c.badLine)
			}
			brk, _, sum, err := VerifyResumed(segments(t, path)...)
			if err != nil || brk == nil || brk.Seq != c.highest+1 || sum.Records != 2 || sum.Breaks != 1 || sum.Captures != 1 {
				t.Errorf("VerifyResumed: %v, %+v, %v; want the break and one capture after it", brk, sum, err)
			}
			n := 0
			if err := Scan(path, func(Record) error { n++; return nil }); err != nil {
				t.Errorf("Scan over the damaged file: %v", err)
			}
			if _, err := l.Append(KindBreak, Break{}); err == nil {
				t.Error("Append of a break record accepted; only the log writes them")
			}
			l.Close()
			l2 := openLog(t, path, Options{MaxBytes: c.maxBytes, SetAsideDamaged: true})
			if l2.Breaks() != 0 || l2.LastSeq() != c.highest+2 {
				t.Errorf("second open: %d breaks, LastSeq %d; want none, %d", l2.Breaks(), l2.LastSeq(), c.highest+2)
			}
		})
	}
}

// editLine changes line n (1-based) of the file at path in place.
func editLine(t *testing.T, path string, n int, edit func([]byte)) {
	t.Helper()
	ls := splitLines(readFile(t, path))
	edit(ls[n-1])
	writeFile(t, path, joinLines(ls))
}

// TestOutsideChangesCounted (issue 17, item 5's metric): each change of
// the active file outside the Log that Reattach takes up is counted once;
// a Reattach that finds the file as the Log left it counts nothing.
func TestOutsideChangesCounted(t *testing.T) {
	path := tempLog(t)
	l := openLog(t, path, Options{})
	fill(t, l, 3)
	if _, err := l.Reattach(); err != nil || l.OutsideChanges() != 0 {
		t.Fatalf("unchanged file: %v, %d changes counted", err, l.OutsideChanges())
	}
	os.Rename(path, path+".1")
	if _, err := l.Reattach(); err != nil || l.OutsideChanges() != 1 {
		t.Fatalf("moved away: %v, %d changes counted, want 1", err, l.OutsideChanges())
	}
	fill(t, l, 2)
	os.Remove(path)
	if _, err := l.Reattach(); err != nil || l.OutsideChanges() != 2 {
		t.Fatalf("deleted: %v, %d changes counted, want 2", err, l.OutsideChanges())
	}
}
