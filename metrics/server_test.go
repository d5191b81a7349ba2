package metrics

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/json"
	"encoding/pem"
	"fmt"
	"io"
	"math/big"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/metrics/eventlog"
)

type testServer struct {
	s    *Server
	base string
	mu   sync.Mutex
	why  []string
}

func startServer(t *testing.T, webConfig string, recent *Recent) *testServer {
	t.Helper()
	set := newTestSet(t, false)
	ts := &testServer{}
	s, err := NewServer(ServerOptions{Listen: "127.0.0.1:0", WebConfigFile: webConfig, Gatherer: set.Registry(),
		Recent: recent, Ready: func() []string {
			ts.mu.Lock()
			defer ts.mu.Unlock()
			return ts.why
		}})
	if err != nil {
		t.Fatal(err)
	}
	ts.s = s
	scheme := "http"
	if webConfig != "" && strings.Contains(readFile(t, webConfig), "tls_server_config") {
		scheme = "https"
	}
	ts.base = scheme + "://" + s.Addr().String()
	done := make(chan error, 1)
	go func() { done <- s.Serve() }()
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		s.Shutdown(ctx)
		if err := <-done; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return ts
}

func readFile(t *testing.T, path string) string {
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func get(t *testing.T, c *http.Client, url string) (int, http.Header, string) {
	t.Helper()
	if c == nil {
		c = http.DefaultClient
	}
	resp, err := c.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, resp.Header, string(b)
}

func TestEndpoints(t *testing.T) {
	recent := NewRecent(0)
	for i := uint64(1); i <= 6; i++ {
		kind := eventlog.KindEvent
		if i%3 == 0 {
			kind = eventlog.KindCapture
		}
		recent.Add(eventlog.Record{Seq: i, Kind: kind, Line: fmt.Appendf(nil, `{"v":1,"kind":%q,"seq":%d}`, kind, i)})
	}
	ts := startServer(t, "", recent)
	cases := []struct {
		path     string
		code     int
		contains string
	}{
		{"/healthz", 200, "ok"},
		{"/readyz", 200, "ready"},
		{"/", 200, `href="metrics"`},
		{"/api/events", 200, `"seq":5`},
		{"/api/events?since=4", 200, `[{"v":1,"kind":"event","seq":5}]`},
		{"/api/events?kind=capture", 200, `[{"v":1,"kind":"capture","seq":3},{"v":1,"kind":"capture","seq":6}]`},
		{"/api/events?kind=all&since=2&limit=2", 200, `[{"v":1,"kind":"capture","seq":3},{"v":1,"kind":"event","seq":4}]`},
		{"/api/events?since=99", 200, "[]"},
		{"/api/events?since=-1", 400, "since"},
		{"/api/events?limit=0", 400, "limit"},
		{"/api/events?kind=everything", 400, "kind"},
		{"/nothing", 404, ""},
	}
	for _, c := range cases {
		code, _, body := get(t, nil, ts.base+c.path)
		if code != c.code || !strings.Contains(body, c.contains) {
			t.Errorf("GET %s: %d %q, want %d containing %q", c.path, code, body, c.code, c.contains)
		}
	}
	// /api/events is a JSON array of whole records.
	_, hdr, body := get(t, nil, ts.base+"/api/events?kind=all")
	var recs []map[string]any
	if err := json.Unmarshal([]byte(body), &recs); err != nil || len(recs) != 6 {
		t.Errorf("api/events: %d records (%v), want 6", len(recs), err)
	}
	if ct := hdr.Get("Content-Type"); ct != "application/json" {
		t.Errorf("api/events content type %q", ct)
	}
	// /metrics scrapes and parses as the text exposition format
	// (client_golang's testutil scrapes it as Prometheus would).
	if err := testutil.ScrapeAndCompare(ts.base+"/metrics", strings.NewReader(`
# HELP quietband_queue_depth Captures found complete and waiting for analysis.
# TYPE quietband_queue_depth gauge
quietband_queue_depth 3
`), "quietband_queue_depth"); err != nil {
		t.Error(err)
	}
	// Not ready: 503 and the reasons.
	ts.mu.Lock()
	ts.why = []string{"event log not writable: disk full"}
	ts.mu.Unlock()
	if code, _, body := get(t, nil, ts.base+"/readyz"); code != 503 || !strings.Contains(body, "disk full") {
		t.Errorf("/readyz not ready: %d %q", code, body)
	}
	resp, err := http.Post(ts.base+"/metrics", "text/plain", nil)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusMethodNotAllowed {
		t.Errorf("POST /metrics: %d, want 405", resp.StatusCode)
	}
	if ts.s.srv.ReadHeaderTimeout == 0 || ts.s.srv.WriteTimeout == 0 || ts.s.srv.IdleTimeout == 0 {
		t.Error("server timeouts not set")
	}
}

func TestDefaultListenIsLoopback(t *testing.T) {
	host, _, err := net.SplitHostPort(DefaultListen)
	if err != nil || !net.ParseIP(host).IsLoopback() {
		t.Errorf("DefaultListen %q is not a loopback address", DefaultListen)
	}
}

// scrapeHash is the bcrypt hash (cost 10) of the password "scrape-secret",
// computed with golang.org/x/crypto/bcrypt.GenerateFromPassword; the web
// configuration format wants bcrypt hashes for basic_auth_users.
const scrapeHash = "$2a$10$vgLZvuNPNtZTdHarJloWmOtrpYRh2.fkaVA96FNrQmET/6lYs7wTy"

func TestWebConfigBasicAuthAndTLS(t *testing.T) {
	dir := t.TempDir()
	certPEM, keyPEM := selfSigned(t)
	certFile, keyFile := filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	os.WriteFile(certFile, certPEM, 0o600)
	os.WriteFile(keyFile, keyPEM, 0o600)
	auth := filepath.Join(dir, "auth.yml")
	os.WriteFile(auth, []byte("basic_auth_users:\n  scraper: "+scrapeHash+"\n"), 0o600)
	tlsAuth := filepath.Join(dir, "tls.yml")
	os.WriteFile(tlsAuth, []byte("tls_server_config:\n  cert_file: "+certFile+"\n  key_file: "+keyFile+
		"\nbasic_auth_users:\n  scraper: "+scrapeHash+"\n"), 0o600)

	pool := x509.NewCertPool()
	pool.AppendCertsFromPEM(certPEM)
	tlsClient := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}

	withAuth := func(c *http.Client, url, user, pass string) int {
		req, _ := http.NewRequest("GET", url, nil)
		if user != "" {
			req.SetBasicAuth(user, pass)
		}
		if c == nil {
			c = http.DefaultClient
		}
		resp, err := c.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	for _, cfg := range []struct {
		name   string
		file   string
		client *http.Client
	}{{"basic auth", auth, nil}, {"tls and basic auth", tlsAuth, tlsClient}} {
		t.Run(cfg.name, func(t *testing.T) {
			ts := startServer(t, cfg.file, nil)
			for _, c := range []struct {
				user, pass string
				code       int
			}{{"", "", 401}, {"scraper", "wrong", 401}, {"other", "scrape-secret", 401}, {"scraper", "scrape-secret", 200}} {
				if got := withAuth(cfg.client, ts.base+"/metrics", c.user, c.pass); got != c.code {
					t.Errorf("user %q password %q: %d, want %d", c.user, c.pass, got, c.code)
				}
			}
			if cfg.client != nil {
				// Plain HTTP to the TLS port is refused (net/http answers 400).
				plainURL := "http://" + ts.s.Addr().String() + "/metrics"
				if got := withAuth(nil, plainURL, "scraper", "scrape-secret"); got != 400 {
					t.Errorf("plain HTTP to the TLS listener: %d, want 400", got)
				}
			}
		})
	}
	// A broken web config is refused before listening.
	bad := filepath.Join(dir, "bad.yml")
	os.WriteFile(bad, []byte("basic_auth_user:\n  x: y\n"), 0o600)
	if _, err := NewServer(ServerOptions{Listen: "127.0.0.1:0", WebConfigFile: bad, Gatherer: newTestSet(t, false).Registry()}); err == nil {
		t.Error("NewServer accepted a web config with an unknown key")
	}
}

// selfSigned makes a P-256 certificate for 127.0.0.1 (crypto/x509).
func selfSigned(t *testing.T) (certPEM, keyPEM []byte) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "quietband test"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IPAddresses: []net.IP{net.IPv4(127, 0, 0, 1)}, KeyUsage: x509.KeyUsageDigitalSignature,
		ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	return pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}),
		pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb})
}
