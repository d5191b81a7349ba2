package metrics

import (
	"net/http"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// TestWebConfigFailsClosed (issue 17, item 11): a web configuration with
// basic-auth users that is then emptied, garbled, stripped of its users or
// deleted while the server runs never lets a request through without the
// credentials of the last good configuration (401, or 500 from the
// toolkit), and the right credentials still work; a valid new set of users
// is taken up.
func TestWebConfigFailsClosed(t *testing.T) {
	dir := t.TempDir()
	auth := filepath.Join(dir, "auth.yml")
	good := "basic_auth_users:\n  scraper: " + scrapeHash + "\n"
	os.WriteFile(auth, []byte(good), 0o600)
	ts := startServer(t, auth, NewRecent(4))
	do := func(path, user, pass string) int {
		req, _ := http.NewRequest("GET", ts.base+path, nil)
		if user != "" {
			req.SetBasicAuth(user, pass)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	for _, c := range []struct {
		name    string
		content *string // nil: file deleted
	}{
		{"emptied", ptr("")},
		{"garbled", ptr("basic_auth_users: [\x00\x01")},
		{"no users", ptr("basic_auth_users: {}\n")},
		{"unknown key", ptr("basic_auth_user:\n  x: y\n")},
		{"deleted", nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			if c.content == nil {
				os.Remove(auth)
			} else {
				os.WriteFile(auth, []byte(*c.content), 0o600)
			}
			for _, p := range []string{"/metrics", "/api/events", "/readyz"} {
				if got := do(p, "", ""); got != 401 && got != 500 {
					t.Errorf("%s without credentials: %d, want 401 (or 500)", p, got)
				}
			}
			os.WriteFile(auth, []byte(good), 0o600)
			if got := do("/metrics", "scraper", "scrape-secret"); got != 200 {
				t.Errorf("/metrics with the credentials after the file was restored: %d, want 200", got)
			}
		})
	}
	// A new valid configuration (another user) is taken up.
	os.WriteFile(auth, []byte("basic_auth_users:\n  other: "+scrapeHash+"\n"), 0o600)
	time.Sleep(10 * time.Millisecond)
	if got := do("/metrics", "other", "scrape-secret"); got != 200 {
		t.Errorf("new user: %d, want 200", got)
	}
	if got := do("/metrics", "scraper", "scrape-secret"); got != 401 {
		t.Errorf("removed user: %d, want 401", got)
	}
}
