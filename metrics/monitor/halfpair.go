package monitor

import (
	"errors"
	"path"
	"strings"

	"quietband/ingest"
)

// halfPairResolved returns the note of a whole SigMF pair, found in input
// under name (its metadata file) with data SHA-256 sha, whose data file was
// recorded before as quarantined, alone, as half of a pair with the same
// bytes: "" when it was not. The note is what resolves that quarantine in
// the log (issue 17, item 2: the half pair was never moved away, and the
// pair is analysed once it is whole).
func (m *Monitor) halfPairResolved(input, name, sha string) (string, error) {
	dataName := strings.TrimSuffix(name, path.Ext(name)) + ingest.DataExt
	if dataName == name {
		return "", nil
	}
	// The data file alone, with these bytes; or the metadata alone, under
	// the pair's own name, with no data to hash.
	for _, half := range []struct{ name, sha string }{{dataName, sha}, {name, ""}} {
		ent, known, err := m.ledger.Lookup(input, half.name)
		if err != nil {
			return "", err
		}
		if !known {
			continue
		}
		if reason, ok := ent.Outcome(half.sha, ""); ok && reason != "" {
			return "completes " + half.name + ", recorded before as quarantined (" + reason + "): that quarantine is resolved", nil
		}
	}
	return "", nil
}

// movable reports whether a quarantined capture is moved to the quarantine
// folder: not a half pair, which stays where it is for its other half.
func movable(w ingest.Found) bool { return !errors.Is(w.Problem, ingest.ErrHalfPair) }
