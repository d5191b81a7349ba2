package main

import (
	"fmt"
	"io"
	"os"
	"time"

	"quietband/metrics/eventlog"
)

func init() {
	register("verify", "check an event log's records, sequence and hash chain", runVerify)
}

func runVerify(args []string, out, errOut io.Writer) error {
	fs := newFlags("verify", "LOG...", `
Checks an event log: every line is a whole JSON record with the schema
header (v, kind, seq, prev), seq runs 1, 2, 3 ... without gap, and each
record's prev is the SHA-256 of the line before it. Given one file, its
rotated segments are checked with it, oldest first; given several, they are
taken in the order given. Prints the first bad record (file, line, what is
wrong) and exits 1, or a one-line summary and exits 0. A log the daemon
went on past a damaged file (set aside as LOG.damaged-SEQ, its next file
starting with a break record: a quarantined capture record marked
log_break) is BAD at the damage; the lines after
it say where the chain resumed and whether everything from there verifies.`, errOut)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() == 0 {
		fs.Usage()
		return errUsage
	}
	paths := fs.Args()
	for _, p := range paths {
		// A missing file is named, not taken as "no files given" (issue 18).
		if _, err := os.Stat(p); err != nil {
			fmt.Fprintf(out, "BAD  %v\n", err)
			return exitCode(1)
		}
	}
	if len(paths) == 1 {
		segs, err := eventlog.Segments(paths[0])
		if err != nil {
			return err
		}
		paths = segs
	}
	sum, err := eventlog.Verify(paths...)
	if err != nil {
		fmt.Fprintf(out, "BAD  %v\n", err)
		reportResumed(out, paths)
		return exitCode(1)
	}
	span := "no times"
	if !sum.First.IsZero() {
		span = sum.First.Format(time.RFC3339) + " .. " + sum.Last.Format(time.RFC3339)
	}
	fmt.Fprintf(out, "OK   %d records (%d events, %d captures) in %d file(s), %s, head %s\n",
		sum.Records, sum.Events, sum.Captures, sum.Files, span, sum.Head)
	return nil
}

// reportResumed prints, after a BAD line, whether the log resumed after
// the damage at a break record (issue 17, item 8) and whether the records
// from it on verify.
func reportResumed(out io.Writer, paths []string) {
	brk, b, sum, err := eventlog.VerifyResumed(paths...)
	if brk == nil {
		return
	}
	fmt.Fprintf(out, "     the writer set %s aside (bad at line %d) and resumed at seq %d (%s:%d) from the last good record, seq %d, hash %s\n",
		b.DamagedFile, b.DamagedLine, brk.Seq, brk.File, brk.LineNo, b.LastGoodSeq, b.LastGoodHash)
	if err != nil {
		fmt.Fprintf(out, "BAD  after the resumption: %v\n", err)
		return
	}
	fmt.Fprintf(out, "OK   from the resumption: %d records (%d events, %d captures), head %s\n", sum.Records, sum.Events, sum.Captures, sum.Head)
}
