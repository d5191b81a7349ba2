package monitor

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics"
	"quietband/metrics/eventlog"
	"quietband/metrics/ledger"
	"quietband/metrics/replay"
)

// handle analyses one capture and records it. It returns an error only
// when the capture was abandoned (procCtx done) or the daemon cannot go on.
func (m *Monitor) handle(ctx context.Context, w ingest.Found) error {
	m.setBehind(time.Since(w.Ready) > m.cfg.FallingBehindAfter)
	name := w.Name
	if w.Problem != nil {
		if st, err := os.Lstat(w.Path); err == nil && st.IsDir() {
			// A folder that cannot be read is no capture: nothing is
			// recorded (nor moved), and its captures are found by a rescan
			// once it can be read again.
			m.log.Error("quietband run: cannot read folder; the captures in it are picked up once it is readable again",
				"folder", w.Path, "input", w.Input, "err", w.Problem)
			return nil
		}
	}
	// The data file is read through a link (within the watched folder)
	// when the capture opened; a capture with a problem is hashed as the
	// file the name is, links not followed.
	follow := w.Problem == nil
	// The identity of the file about to be read: what the ledger keeps
	// with the record, so that the next sighting of the unchanged file
	// needs no hashing.
	id, idOK := ledger.Identify(w.DataPath, follow)
	sha, hashed := "", false
	prevReason, retrying := "", false
	// A capture is its input and name (issue 17, item 6), its content the
	// data's SHA-256 and how its metadata reads them (item 7): the
	// metadata's, taken from the bytes the watcher parsed.
	meta := replay.MetadataSHA256(w)
	var replaces, replacesMeta string // the content of the capture's latest record
	ent, known, err := m.ledger.Lookup(w.Input, name)
	if err != nil {
		return err
	}
	if known {
		replaces, replacesMeta = ent.Latest()
		var ok bool
		if sha, ok = ent.SHAFor(id, idOK); !ok {
			var stable bool
			sha, stable = m.hashData(w.DataPath, follow, id, idOK)
			if _, recorded := ent.Outcome(sha, meta); recorded && stable {
				m.ledger.Remember(w.Input, name, id, sha)
			}
		}
		hashed = true
		if reason, ok := ent.Outcome(sha, meta); ok {
			if reason == "" {
				m.log.Debug("quietband run: already analysed", "capture", name, "input", w.Input)
				return nil
			}
			prevReason, retrying = reason, true
		}
	}

	out, err := m.analyse(ctx, w)
	if err != nil {
		m.log.Info("quietband run: capture abandoned; it is analysed again on the next start", "capture", name)
		return err
	}
	if out.Err != nil && ingest.Transient(out.Err) && m.retryLater(w, out.Err) {
		return nil
	}
	res, rec := out.Result, out.Record
	if rec.Status == detect.StatusQuarantined {
		if !hashed {
			sha, _ = m.hashData(w.DataPath, follow, id, idOK)
			hashed = true
		}
		rec.SHA256 = sha
		if retrying && rec.Error == prevReason {
			m.log.Debug("quietband run: still quarantined for the recorded reason", "capture", name)
			return nil
		}
	}
	if note := replacesNote(replaces, replacesMeta, rec); note != "" && !retrying {
		// The capture changed after it was recorded (a recorder came back
		// to it, or its metadata was corrected): this record is its
		// current one.
		rec.Notes = append(rec.Notes, note)
		m.log.Info("quietband run: capture changed after it was recorded; its new record replaces the earlier one",
			"capture", name, "input", w.Input, "note", note)
	}
	if w.Problem == nil && w.DataPath != w.Path && rec.SHA256 != "" {
		note, err := m.halfPairResolved(w.Input, name, rec.SHA256)
		if err != nil {
			return err
		}
		if note != "" {
			rec.Notes = append(rec.Notes, note)
			m.log.Info("quietband run: half pair completed; its quarantine is resolved", "capture", name, "input", w.Input)
		}
	}

	var items []eventlog.Item
	var events []detect.Event
	if res != nil {
		events = res.Events
		for _, e := range res.Events {
			dup, err := m.ledger.HasEvent(e.ID)
			if err != nil {
				return err
			}
			if dup {
				// A capture redone after a crash, or the same data under
				// another name (the id comes from the data's SHA-256).
				m.log.Info("quietband run: event already in the log (capture redone after a restart, or the same data recorded before)",
					"capture", name, "id", e.ID)
				continue
			}
			items = append(items, eventlog.Item{Kind: eventlog.KindEvent, Body: e})
		}
	}
	items = append(items, eventlog.Item{Kind: eventlog.KindCapture, Body: rec})
	recs, err := m.commit.Commit(ctx, items)
	if err != nil && ctx.Err() == nil {
		// The record cannot be encoded (a value JSON has no form for):
		// record the capture as quarantined with that reason instead.
		m.log.Error("quietband run: cannot record the analysis; quarantining the capture", "capture", name, "err", err)
		if rec.SHA256 != "" {
			sha = rec.SHA256
		} else if !hashed {
			sha, _ = m.hashData(w.DataPath, follow, id, idOK)
		}
		res, events = nil, nil
		rec = detect.CaptureRecord{Capture: name, Input: w.Input, SHA256: sha, Status: detect.StatusQuarantined,
			Error: "analysis could not be recorded: " + err.Error()}
		recs, err = m.commit.Commit(ctx, []eventlog.Item{{Kind: eventlog.KindCapture, Body: rec}})
	}
	if err != nil {
		m.log.Info("quietband run: capture abandoned before it was recorded; it is analysed again on the next start", "capture", name)
		return err
	}
	m.processed.Add(1)
	// Keep the identity only if the file still has it: one that changed
	// while it was analysed is hashed at its next sighting.
	var stamps []ledger.Stamp
	if idOK && rec.SHA256 != "" {
		if now, ok := ledger.Identify(w.DataPath, follow); ok && now == id {
			stamps = append(stamps, ledger.Stamp{Input: w.Input, Name: name, ID: id})
		}
	}
	if err := m.ledger.Note(recs, stamps...); err != nil {
		// The record is in the log; the ledger retries (save), and a
		// restart catches it up from the log in any case.
		m.log.Debug("quietband run: ledger not updated yet", "capture", name, "err", err)
	}
	m.anchor(recs)
	m.recent.Add(recs...)

	mc := metrics.Capture{Input: w.Input, Record: rec, Events: events, At: time.Now(), Satellites: m.pipe.GNSS != nil}
	if res != nil {
		mc.Bytes = w.Capture.DataBytes
		mc.Duration = w.Capture.Duration()
		mc.Elapsed = res.Elapsed
		if len(events) == 0 {
			// A clean capture taught the baseline: save it now, right
			// after the capture's record, so that a crash loses at most
			// the capture in hand (which is then analysed again against
			// the same baseline as it would have been).
			m.baseDirty = true
			m.saveBaseline()
		}
	}
	m.set.ObserveCapture(mc)

	if rec.Status == detect.StatusQuarantined {
		m.log.Warn("quietband run: capture quarantined", "capture", name, "input", w.Input, "reason", rec.Error)
		if m.cfg.QuarantineDir != "" && movable(w) {
			m.moveAway(w, filepath.Join(m.cfg.QuarantineDir, w.Input), "quarantine")
		}
		return nil
	}
	classes := make([]string, 0, len(events))
	for _, e := range events {
		classes = append(classes, e.Class)
	}
	m.log.Info("quietband run: capture analysed", "capture", name, "input", w.Input, "events", len(events),
		"classes", strings.Join(classes, ","), "took", res.Elapsed.Round(time.Microsecond))
	return nil
}

// replacesNote is the note of a capture record rec that replaces the
// capture's latest record, of data SHA-256 sha and metadata SHA-256 meta
// ("" when there is none): "" when rec has the same content (or no data
// SHA-256). The data changed (issue 17, item 4), or only how its metadata
// reads them (item 7: a corrected core:sample_rate, say); a metadata
// SHA-256 the earlier record did not give is no change.
func replacesNote(sha, meta string, rec detect.CaptureRecord) string {
	switch {
	case sha == "" || rec.SHA256 == "":
		return ""
	case rec.SHA256 != sha:
		return "replaces the earlier record of this capture (data SHA-256 " + sha +
			"): the data changed after that record was written, and this record is the current one"
	case meta != "" && rec.MetadataSHA256 != meta:
		return "replaces the earlier record of this capture (metadata SHA-256 " + meta +
			"): its metadata changed after that record was written (the data did not), and this record is the current one"
	}
	return ""
}

// hashData hashes a capture's data file (counted in m.hashes) and reports
// whether the file kept identity id while it was read, so that the SHA-256
// is that of the file with this identity.
func (m *Monitor) hashData(path string, follow bool, id ledger.FileID, idOK bool) (sha string, stable bool) {
	m.hashes.Add(1)
	sha = ledger.HashFile(path, follow)
	if !idOK || sha == "" {
		return sha, false
	}
	now, ok := ledger.Identify(path, follow)
	return sha, ok && now == id
}
