package eventlog

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// sha is the lowercase hex SHA-256 (FIPS 180-4) of b, computed with
// crypto/sha256, whose known answers TestSHA256KnownAnswers checks.
func sha(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

var zeros64 = strings.Repeat("0", 64)

// contractLine writes a record the way DESIGN.md's contract spells it,
// independently of the package: header members, then the body members
// (compact JSON without the braces, "" for none).
func contractLine(kind string, seq uint64, prev, members string) string {
	if members != "" {
		members = "," + members
	}
	return fmt.Sprintf(`{"v":1,"kind":"%s","seq":%d,"prev":"%s"%s}`, kind, seq, prev, members)
}

// chain builds a log's bytes from (kind, members) pairs with a correct
// seq/prev chain starting at seq 1.
func chain(recs ...[2]string) []byte {
	var b bytes.Buffer
	prev := zeros64
	for i, r := range recs {
		line := contractLine(r[0], uint64(i+1), prev, r[1])
		b.WriteString(line)
		b.WriteByte('\n')
		prev = sha([]byte(line))
	}
	return b.Bytes()
}

// testEvent is a minimal event body.
type testEvent struct {
	ID    string `json:"id"`
	Class string `json:"class,omitempty"`
	N     int    `json:"n"`
}

// testCapture is a minimal capture body.
type testCapture struct {
	Capture string `json:"capture"`
	Status  string `json:"status"`
	Events  int    `json:"events"`
}

func openLog(t testing.TB, path string, opt Options) *Log {
	t.Helper()
	l, err := Open(path, opt)
	if err != nil {
		t.Fatalf("Open(%s): %v", path, err)
	}
	t.Cleanup(func() { l.Close() })
	return l
}

// fill appends n records alternating events and captures, with a body
// whose length varies with i so that rotation boundaries fall unevenly.
func fill(t testing.TB, l *Log, n int) []Record {
	t.Helper()
	var recs []Record
	for i := range n {
		var (
			r   Record
			err error
		)
		if i%3 == 2 {
			r, err = l.Append(KindCapture, testCapture{Capture: fmt.Sprintf("c%03d.sigmf-meta", i), Status: "ok", Events: 2})
		} else {
			r, err = l.Append(KindEvent, testEvent{ID: fmt.Sprintf("e%d", i), Class: strings.Repeat("x", i%7), N: i})
		}
		if err != nil {
			t.Fatalf("append %d: %v", i, err)
		}
		recs = append(recs, r)
	}
	return recs
}

func readFile(t testing.TB, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func writeFile(t testing.TB, path string, b []byte) {
	t.Helper()
	if err := os.WriteFile(path, b, 0o640); err != nil {
		t.Fatal(err)
	}
}

// splitLines splits file bytes into lines without their newlines; a final
// line without newline is kept.
func splitLines(b []byte) [][]byte {
	if len(b) == 0 {
		return nil
	}
	ls := bytes.Split(b, []byte("\n"))
	if len(ls[len(ls)-1]) == 0 {
		ls = ls[:len(ls)-1]
	}
	return ls
}

func joinLines(ls [][]byte) []byte {
	var b bytes.Buffer
	for _, l := range ls {
		b.Write(l)
		b.WriteByte('\n')
	}
	return b.Bytes()
}

func segments(t testing.TB, path string) []string {
	t.Helper()
	s, err := Segments(path)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// logBuffer returns a logger writing JSON records into buf.
func logBuffer(buf *bytes.Buffer) *slog.Logger {
	return slog.New(slog.NewJSONHandler(buf, &slog.HandlerOptions{Level: slog.LevelDebug}))
}

func tempLog(t testing.TB) string {
	return filepath.Join(t.TempDir(), "events.jsonl")
}
