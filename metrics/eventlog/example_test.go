package eventlog_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"quietband/metrics/eventlog"
)

func Example() {
	dir, err := os.MkdirTemp("", "eventlog-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "events.jsonl")

	l, err := eventlog.Open(path, eventlog.Options{})
	if err != nil {
		log.Fatal(err)
	}
	// A capture's events and its capture record go in one batch: one
	// write, one fsync.
	recs, err := l.AppendBatch([]eventlog.Item{
		{Kind: eventlog.KindEvent, Body: map[string]any{"id": "e1", "class": "cw"}},
		{Kind: eventlog.KindCapture, Body: map[string]any{"capture": "a.sigmf-meta", "status": "ok", "events": 1}},
	})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(string(recs[0].Line))
	// Record 2 carries the SHA-256 of line 1 (the value below was checked
	// with Python's hashlib).
	fmt.Println(recs[1].Seq, recs[1].Prev[:16]+"…")
	head := l.Head()
	if err := l.Close(); err != nil {
		log.Fatal(err)
	}

	files, err := eventlog.Segments(path)
	if err != nil {
		log.Fatal(err)
	}
	sum, err := eventlog.Verify(files...)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(sum.Records, sum.Events, sum.Captures, sum.Head == head)
	// Output:
	// {"v":1,"kind":"event","seq":1,"prev":"0000000000000000000000000000000000000000000000000000000000000000","class":"cw","id":"e1"}
	// 2 db315385ec3edcfb…
	// 2 1 1 true
}
