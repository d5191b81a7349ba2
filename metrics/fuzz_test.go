package metrics

import (
	"encoding/json"
	"fmt"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"quietband/metrics/eventlog"
)

// FuzzEventsParams (issue 17): any query string of /api/events is answered
// 200 with a JSON array (RFC 8259) of at most MaxEvents records, in seq
// order, each with a seq above since and of the kind asked for, or 400;
// never anything else, never a panic.
func FuzzEventsParams(f *testing.F) {
	for _, q := range []string{"", "since=3", "since=0&limit=2&kind=all", "kind=capture", "limit=0", "limit=-1",
		"since=18446744073709551615", "since=18446744073709551616", "limit=99999999999999999999", "kind=%ZZ",
		"since=1&since=2", "kind=event&kind=capture", "limit=1e3", ";", "since=+5", "since=0x10"} {
		f.Add(q)
	}
	recent := NewRecent(16)
	for i := uint64(1); i <= 12; i++ {
		kind := eventlog.KindEvent
		if i%3 == 0 {
			kind = eventlog.KindCapture
		}
		line := fmt.Sprintf(`{"v":1,"kind":%q,"seq":%d,"prev":"x"}`, kind, i)
		recent.Add(eventlog.Record{Seq: i, Kind: kind, Line: []byte(line)})
	}
	s := &Server{opt: ServerOptions{Recent: recent}}
	f.Fuzz(func(t *testing.T, rawQuery string) {
		r := &http.Request{Method: "GET", URL: &url.URL{Path: "/api/events", RawQuery: rawQuery}}
		w := httptest.NewRecorder()
		s.events(w, r)
		switch w.Code {
		case http.StatusBadRequest:
			return
		case http.StatusOK:
		default:
			t.Fatalf("?%s: status %d, want 200 or 400", rawQuery, w.Code)
		}
		var recs []struct {
			Seq  uint64 `json:"seq"`
			Kind string `json:"kind"`
		}
		if err := json.Unmarshal(w.Body.Bytes(), &recs); err != nil {
			t.Fatalf("?%s: body is not a JSON array of records: %v", rawQuery, err)
		}
		q := r.URL.Query()
		since, _ := strconv.ParseUint(q.Get("since"), 10, 64)
		if len(recs) > MaxEvents {
			t.Fatalf("?%s: %d records, more than MaxEvents", rawQuery, len(recs))
		}
		if v := q.Get("limit"); v != "" {
			if n, _ := strconv.Atoi(v); len(recs) > n {
				t.Fatalf("?%s: %d records, more than the limit", rawQuery, len(recs))
			}
		}
		for i, rec := range recs {
			if rec.Seq <= since || (i > 0 && rec.Seq <= recs[i-1].Seq) {
				t.Fatalf("?%s: record %d has seq %d (since %d, previous %v)", rawQuery, i, rec.Seq, since, recs[:i])
			}
			switch k := q.Get("kind"); {
			case (k == "" || k == "event") && rec.Kind != eventlog.KindEvent, k == "capture" && rec.Kind != eventlog.KindCapture:
				t.Fatalf("?%s: a %s record", rawQuery, rec.Kind)
			}
		}
	})
}

// FuzzWebConfig (issue 17, item 11): whatever the web configuration file
// becomes after one with basic-auth users (any bytes: YAML or not, users or
// not, TLS keys that point nowhere), a request without credentials is
// never answered 200.
func FuzzWebConfig(f *testing.F) {
	good := "basic_auth_users:\n  scraper: " + scrapeHash + "\n"
	for _, s := range []string{"", good, "basic_auth_users: {}\n", "basic_auth_users:\n  other: x\n", "basic_auth_user:\n  x: y\n",
		"tls_server_config:\n  cert_file: /nowhere\n", "\x00\xff", "basic_auth_users: [", "http_server_config:\n  http2: false\n"} {
		f.Add([]byte(s))
	}
	dir := f.TempDir()
	auth := filepath.Join(dir, "auth.yml")
	os.WriteFile(auth, []byte(good), 0o600)
	g := newAuthGuard(auth, http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) { w.WriteHeader(http.StatusOK) }),
		slog.New(slog.DiscardHandler))
	f.Fuzz(func(t *testing.T, content []byte) {
		if err := os.WriteFile(auth, content, 0o600); err != nil {
			t.Fatal(err)
		}
		g.mu.Lock()
		g.stamp = "" // read it again whatever its time
		g.mu.Unlock()
		w := httptest.NewRecorder()
		g.ServeHTTP(w, &http.Request{Method: "GET", URL: &url.URL{Path: "/metrics"}, Header: http.Header{}})
		if w.Code == http.StatusOK {
			t.Fatalf("web config %q: a request without credentials answered 200", content)
		}
	})
}
