package metrics

import (
	"crypto/sha256"
	"fmt"
	"log/slog"
	"net/http"
	"os"
	"sync"

	"github.com/prometheus/client_golang/prometheus"
	"go.yaml.in/yaml/v3"
	"golang.org/x/crypto/bcrypt"
)

// authGuard keeps basic authentication from failing open (issue 17, item
// 11). The exporter toolkit reads the web configuration file again on each
// request; a file emptied or stripped of its users while the daemon runs
// would let every request through. The guard, behind the toolkit, checks
// each request against the users of the last good configuration: a file
// that cannot be read, is not YAML, or has no basic_auth_users after one
// had them, keeps those (logged as an error, quietband_web_config_ok 0)
// until a configuration with users comes. Passwords are checked against
// the bcrypt hashes (golang.org/x/crypto/bcrypt, the toolkit's format);
// a pair that passed is remembered by its SHA-256 so that a scrape does
// not pay bcrypt's cost each time.
type authGuard struct {
	file string
	log  *slog.Logger
	next http.Handler
	ok   prometheus.Gauge

	mu     sync.Mutex
	stamp  string            // size, modification time and status of the file last read
	users  map[string]string // user → bcrypt hash; nil: no authentication configured
	passed map[[32]byte]bool // SHA-256 of hash, user and password that bcrypt accepted
}

// webConfigUsers is the part of the web configuration the guard reads.
type webConfigUsers struct {
	Users map[string]string `yaml:"basic_auth_users"`
}

func newAuthGuard(file string, next http.Handler, log *slog.Logger) *authGuard {
	g := &authGuard{file: file, log: log, next: next, passed: map[[32]byte]bool{},
		ok: prometheus.NewGauge(prometheus.GaugeOpts{Name: "quietband_web_config_ok",
			Help: "1 while the web configuration file's last reading was usable; 0 while the last good one's users are kept because it is missing, unreadable, not YAML or without the users it had."})}
	g.ok.Set(1)
	g.refresh()
	return g
}

// refresh reads the file again when its size, time or presence changed.
func (g *authGuard) refresh() {
	st, err := os.Stat(g.file)
	stamp := "missing"
	if err == nil {
		stamp = fmt.Sprint(st.Size(), st.ModTime().UnixNano(), st.Mode())
	}
	g.mu.Lock()
	defer g.mu.Unlock()
	if stamp == g.stamp {
		return
	}
	g.stamp = stamp
	var cfg webConfigUsers
	problem := ""
	if b, err := os.ReadFile(g.file); err != nil {
		problem = err.Error()
	} else if err := yaml.Unmarshal(b, &cfg); err != nil {
		problem = "not YAML: " + err.Error()
	} else if len(cfg.Users) == 0 && g.users != nil {
		problem = "it has no basic_auth_users"
	}
	if problem != "" {
		g.ok.Set(0)
		if g.users != nil {
			g.log.Error("metrics: web configuration unusable; keeping the users of the last good one (authentication stays on)",
				"file", g.file, "problem", problem, "users", len(g.users))
		} else {
			g.log.Error("metrics: web configuration unusable", "file", g.file, "problem", problem)
		}
		return
	}
	g.ok.Set(1)
	if len(cfg.Users) > 0 {
		if g.users != nil {
			g.log.Info("metrics: web configuration read again", "file", g.file, "users", len(cfg.Users))
		}
		g.users, g.passed = cfg.Users, map[[32]byte]bool{}
	}
}

func (g *authGuard) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	g.refresh()
	g.mu.Lock()
	users := g.users
	g.mu.Unlock()
	if users != nil && !g.allowed(users, r) {
		w.Header().Set("WWW-Authenticate", `Basic realm="quietband", charset="UTF-8"`)
		plain(w, http.StatusUnauthorized, "unauthorized\n")
		return
	}
	g.next.ServeHTTP(w, r)
}

// allowed checks the request's basic-auth credentials against users.
func (g *authGuard) allowed(users map[string]string, r *http.Request) bool {
	user, pass, ok := r.BasicAuth()
	if !ok {
		return false
	}
	hash, known := users[user]
	if !known {
		// The same work as for a known user: no timing tells users apart.
		bcrypt.CompareHashAndPassword([]byte("$2a$10$0000000000000000000000000000000000000000000000000000."), []byte(pass))
		return false
	}
	key := sha256.Sum256([]byte(hash + "\x00" + user + "\x00" + pass))
	g.mu.Lock()
	hit := g.passed[key]
	g.mu.Unlock()
	if hit {
		return true
	}
	if bcrypt.CompareHashAndPassword([]byte(hash), []byte(pass)) != nil {
		return false
	}
	g.mu.Lock()
	if len(g.passed) > 1024 {
		g.passed = map[[32]byte]bool{}
	}
	g.passed[key] = true
	g.mu.Unlock()
	return true
}
