// Package eventlog is quietband's durable, tamper-evident record of what it
// found: an append-only JSON Lines file (RFC 8259 JSON, one object per
// '\n'-terminated UTF-8 line) that other tools read.
//
// The log owns the four header members of every record and splices them in
// front of the members of a body whose schema is defined elsewhere:
//
//	{"v":1,"kind":"event","seq":7,"prev":"3f0c…",<body members>}
//
// v is the schema version (1), kind is "event" or "capture" (a break
// record, which the log writes itself, is a capture record marked
// "log_break": true: see below), seq counts
// records 1, 2, 3 … over the whole log (rotation included), and prev chains
// the records together:
//
//	prev_1 = "000…0" (64 zeros)
//	prev_n = hex(SHA-256(line_{n-1}))   for n > 1
//
// where line_{n-1} is the exact bytes of the previous line without its
// newline and SHA-256 is the hash of FIPS 180-4. Hashing the stored bytes,
// rather than a re-encoding of the record, avoids any question of JSON
// canonicalisation: changing, deleting, inserting or reordering a record
// breaks the chain at that point. Only the last record is not covered by a
// later one, so whoever needs to detect a rewritten tail (or a whole log
// rewritten with a recomputed chain) keeps the head hash and last seq
// somewhere else (metrics, journal) and compares them with what Verify
// reports.
//
// Every append is one write(2) of the whole line, or of the whole batch of
// lines, followed by fsync(2) before it returns. After a failed write or
// sync the Log refuses further appends (the kernel may have dropped the
// dirty pages) until Reopen has re-read the file. On Open and Reopen a torn
// tail (a last line cut short by a crash) is truncated away and reported; a
// bad line followed by more lines is corruption and the Log refuses to open.
//
// When Options.MaxBytes is set, the active file is renamed to a segment
// named after the seq of its first record (events.jsonl →
// events.000000000001.jsonl) and a new active file is started; the chain
// continues across segments. Segments lists the files oldest first, which is
// the order Verify and NewReader expect; ScanFrom reads the records from a
// given seq on without opening the segments that end before it.
//
// With Options.SetAsideDamaged (the daemon's), a file that fails
// verification when the log is opened (a byte changed in place: a bad line
// followed by more, or a break of the chain) does not keep the log shut:
// it is renamed, untouched, to <active>.damaged-<first seq> and a new
// active file starts with a break record (Break: a quarantined capture
// record marked "log_break": true, Record.Kind KindBreak) naming the
// damaged file, line and problem and carrying the last good seq and hash,
// the latter as its prev. Verify over Segments then names the damage, and
// VerifyResumed checks the chain from the break on.
package eventlog
