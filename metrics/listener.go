package metrics

import (
	"log/slog"
	"net"
	"sync"
	"sync/atomic"
	"time"
)

// Connection bounds of the HTTP listener (issue 17, item 3: 1,100 clients
// holding connections open under a 1,024-file limit left the analysis no
// descriptor to open a capture with). The bounds follow the process's
// open-file limit L (RLIMIT_NOFILE, soft):
//
//	connections  = clamp(L/4, 4, 512)       accepted at once, all clients
//	per client   = clamp(connections/4, 4, 32)  from one remote address
//
// so that at least three quarters of the descriptors stay with the
// daemon's own files. Past the first bound the listener stops accepting
// (further clients wait in the kernel's accept queue, holding no
// descriptor of the daemon's); past the second a new connection from that
// address is closed at once.
func connBounds(nofile uint64) (total, perClient int) {
	clamp := func(v, lo, hi uint64) int { return int(max(lo, min(v, hi))) }
	total = clamp(nofile/4, 4, 512)
	perClient = clamp(uint64(total)/4, 4, 32)
	return total, perClient
}

// boundedListener is a net.Listener that holds at most cap(slots)
// connections open at once, and at most perClient from one remote IP
// address.
type boundedListener struct {
	net.Listener
	slots     chan struct{}
	perClient int
	done      chan struct{}
	closeOnce sync.Once
	log       *slog.Logger

	mu      sync.Mutex
	clients map[string]int

	refused  atomic.Uint64 // connections closed for the per-client bound
	lastWarn atomic.Int64  // unix ns of the last warning about refusals
}

func newBoundedListener(ln net.Listener, total, perClient int, log *slog.Logger) *boundedListener {
	return &boundedListener{Listener: ln, slots: make(chan struct{}, total), perClient: perClient,
		done: make(chan struct{}), log: log, clients: map[string]int{}}
}

// Accept waits for a free slot, then for a connection; one from an address
// that holds perClient connections already is closed and not returned.
func (l *boundedListener) Accept() (net.Conn, error) {
	for {
		select {
		case l.slots <- struct{}{}:
		case <-l.done:
			return nil, net.ErrClosed
		}
		c, err := l.Listener.Accept()
		if err != nil {
			<-l.slots
			return nil, err
		}
		host := c.RemoteAddr().String()
		if h, _, err := net.SplitHostPort(host); err == nil {
			host = h
		}
		l.mu.Lock()
		if l.clients[host] >= l.perClient {
			l.mu.Unlock()
			c.Close()
			<-l.slots
			n := l.refused.Add(1)
			if now := time.Now().UnixNano(); now-l.lastWarn.Load() > int64(time.Minute) {
				l.lastWarn.Store(now)
				l.log.Warn("metrics: HTTP client holds too many connections; new ones closed", "client", host,
					"per_client", l.perClient, "refused_total", n)
			}
			continue
		}
		l.clients[host]++
		l.mu.Unlock()
		return &boundedConn{Conn: c, l: l, host: host}, nil
	}
}

// Close closes the listener and ends a wait for a slot.
func (l *boundedListener) Close() error {
	l.closeOnce.Do(func() { close(l.done) })
	return l.Listener.Close()
}

func (l *boundedListener) release(host string) {
	l.mu.Lock()
	if l.clients[host]--; l.clients[host] <= 0 {
		delete(l.clients, host)
	}
	l.mu.Unlock()
	<-l.slots
}

// boundedConn gives its slot back when closed (once).
type boundedConn struct {
	net.Conn
	l    *boundedListener
	host string
	once sync.Once
}

func (c *boundedConn) Close() error {
	err := c.Conn.Close()
	c.once.Do(func() { c.l.release(c.host) })
	return err
}
