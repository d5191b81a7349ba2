package metrics

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"html/template"
	"log/slog"
	"net"
	"net/http"
	"strconv"
	"strings"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"
	"github.com/prometheus/exporter-toolkit/web"
)

// DefaultListen is the default address of the HTTP endpoints: loopback
// only, so that exposing them is an explicit setting. Port 7461 lies
// outside the 9100–10000 range of the Prometheus project's default port
// allocations list for exporters (checked from memory, not against the
// list itself) and is, as far as we know, no widely used product's
// default (issue 18: 9464 was a well-known exporter's).
const DefaultListen = "127.0.0.1:7461"

// MaxEvents is the most records /api/events returns per request.
const MaxEvents = 1000

// ServerOptions configure a Server.
type ServerOptions struct {
	// Listen is the TCP address (host:port); "" means DefaultListen.
	Listen string
	// WebConfigFile is an exporter-toolkit web configuration (TLS, basic
	// auth, headers); "" serves plain HTTP without authentication.
	WebConfigFile string
	Gatherer      prometheus.Gatherer
	// Ready returns the reasons the daemon is not ready; none means ready.
	Ready func() []string
	// Degraded returns what works in a slower or weaker way while the
	// daemon is ready (a ledger that cannot be written: issue 17, item
	// 9); /readyz answers 200 with them listed.
	Degraded func() []string
	// Recent serves /api/events; nil answers it with 404.
	Recent *Recent
	Logger *slog.Logger
	// MaxConns and MaxConnsPerClient bound the connections held open at
	// once, in all and from one remote address; 0: from the process's
	// open-file limit (connBounds).
	MaxConns, MaxConnsPerClient int
}

// Server serves the daemon's HTTP endpoints:
//
//	/metrics     Prometheus exposition of the Gatherer
//	/healthz     200 while the process runs
//	/readyz      200 when Ready reports nothing (listing what Degraded
//	             reports, if anything), else 503 and the reasons
//	/api/events  JSON array of recent records: ?since=SEQ (records with a
//	             larger seq), &limit=N (≤ MaxEvents), &kind=event|capture|all
//	/            a page with links to the above
type Server struct {
	opt ServerOptions
	ln  net.Listener
	srv *http.Server
	log *slog.Logger
}

// NewServer checks the web configuration and listens on the address; Serve
// then answers requests.
func NewServer(opt ServerOptions) (*Server, error) {
	if opt.Listen == "" {
		opt.Listen = DefaultListen
	}
	if opt.Gatherer == nil {
		panic("metrics: NewServer without a Gatherer")
	}
	log := opt.Logger
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	if opt.WebConfigFile != "" {
		if err := web.Validate(opt.WebConfigFile); err != nil {
			return nil, fmt.Errorf("web config %s: %w", opt.WebConfigFile, err)
		}
	}
	ln, err := net.Listen("tcp", opt.Listen)
	if err != nil {
		return nil, fmt.Errorf("listening on %s: %w", opt.Listen, err)
	}
	total, perClient := connBounds(openFileLimit())
	if opt.MaxConns > 0 {
		total = opt.MaxConns
	}
	if opt.MaxConnsPerClient > 0 {
		perClient = opt.MaxConnsPerClient
	}
	ln = newBoundedListener(ln, total, perClient, log)
	log.Debug("metrics: HTTP connections bounded", "connections", total, "per_client", perClient)
	s := &Server{opt: opt, ln: ln, log: log}
	mux := http.NewServeMux()
	var handler http.Handler = mux
	gatherer := opt.Gatherer
	if opt.WebConfigFile != "" {
		g := newAuthGuard(opt.WebConfigFile, mux, log)
		reg := prometheus.NewRegistry()
		reg.MustRegister(g.ok)
		handler, gatherer = g, prometheus.Gatherers{opt.Gatherer, reg}
	}
	mux.Handle("GET /metrics", promhttp.HandlerFor(gatherer, promhttp.HandlerOpts{
		ErrorLog: slogPrintln{log}, MaxRequestsInFlight: 4, Timeout: 30 * time.Second}))
	mux.HandleFunc("GET /healthz", func(w http.ResponseWriter, _ *http.Request) {
		plain(w, http.StatusOK, "ok\n")
	})
	mux.HandleFunc("GET /readyz", s.readyz)
	mux.HandleFunc("GET /api/events", s.events)
	mux.HandleFunc("GET /{$}", s.landing)
	s.srv = &http.Server{
		Handler:           handler,
		ReadHeaderTimeout: 10 * time.Second,
		ReadTimeout:       30 * time.Second,
		WriteTimeout:      60 * time.Second,
		IdleTimeout:       2 * time.Minute,
		MaxHeaderBytes:    64 << 10,
		ErrorLog:          slog.NewLogLogger(log.Handler(), slog.LevelWarn),
	}
	return s, nil
}

// Addr is the address the Server listens on.
func (s *Server) Addr() net.Addr { return s.ln.Addr() }

// Serve answers requests until Shutdown; it then returns nil.
func (s *Server) Serve() error {
	cfg := s.opt.WebConfigFile
	systemd := false
	addrs := []string{s.ln.Addr().String()}
	err := web.Serve(s.ln, s.srv, &web.FlagConfig{WebListenAddresses: &addrs, WebSystemdSocket: &systemd, WebConfigFile: &cfg}, s.log)
	if errors.Is(err, http.ErrServerClosed) {
		return nil
	}
	return err
}

// Shutdown stops the Server, waiting for requests in progress until ctx
// is done.
func (s *Server) Shutdown(ctx context.Context) error { return s.srv.Shutdown(ctx) }

func plain(w http.ResponseWriter, code int, body string) {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	fmt.Fprint(w, body)
}

func (s *Server) readyz(w http.ResponseWriter, _ *http.Request) {
	var why []string
	if s.opt.Ready != nil {
		why = s.opt.Ready()
	}
	if len(why) == 0 {
		var degraded []string
		if s.opt.Degraded != nil {
			degraded = s.opt.Degraded()
		}
		if len(degraded) > 0 {
			plain(w, http.StatusOK, "ready, degraded:\n"+strings.Join(degraded, "\n")+"\n")
			return
		}
		plain(w, http.StatusOK, "ready\n")
		return
	}
	plain(w, http.StatusServiceUnavailable, "not ready:\n"+strings.Join(why, "\n")+"\n")
}

func (s *Server) events(w http.ResponseWriter, r *http.Request) {
	if s.opt.Recent == nil {
		http.NotFound(w, r)
		return
	}
	q := r.URL.Query()
	var since uint64
	if v := q.Get("since"); v != "" {
		n, err := strconv.ParseUint(v, 10, 64)
		if err != nil {
			plain(w, http.StatusBadRequest, "since: want a record seq (a non-negative integer)\n")
			return
		}
		since = n
	}
	limit := MaxEvents
	if v := q.Get("limit"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			plain(w, http.StatusBadRequest, "limit: want a positive integer\n")
			return
		}
		limit = min(n, MaxEvents)
	}
	ev, cp := true, false
	switch q.Get("kind") {
	case "", "event":
	case "capture":
		ev, cp = false, true
	case "all":
		cp = true
	default:
		plain(w, http.StatusBadRequest, "kind: want event, capture or all\n")
		return
	}
	recs := s.opt.Recent.Since(since, limit, ev, cp)
	lines := make([]json.RawMessage, len(recs))
	for i, rec := range recs {
		lines[i] = rec.Line
	}
	body, err := json.Marshal(lines)
	if err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.Write(append(body, '\n'))
}

var landingPage = template.Must(template.New("landing").Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8"><title>quietband</title></head>
<body><h1>quietband</h1>
<p>GNSS-band interference monitor.</p>
<ul>
<li><a href="metrics">metrics</a> (Prometheus)</li>
<li><a href="healthz">healthz</a>, <a href="readyz">readyz</a></li>
<li><a href="api/events">api/events</a> (recent event records, JSON; <code>?since=SEQ</code>)</li>
</ul></body></html>
`))

func (s *Server) landing(w http.ResponseWriter, _ *http.Request) {
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	landingPage.Execute(w, nil)
}

// slogPrintln adapts a *slog.Logger to promhttp's error logger.
type slogPrintln struct{ log *slog.Logger }

func (l slogPrintln) Println(v ...any) {
	l.log.Error("metrics: " + strings.TrimSpace(fmt.Sprintln(v...)))
}
