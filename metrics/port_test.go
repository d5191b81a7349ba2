package metrics

import (
	"net"
	"strconv"
	"testing"
)

// Issue 18 item 10: the default listen port (9464) was a widely used
// exporter's well-known default. The default lies outside 9100–10000, the
// range of the Prometheus project's default port allocations list for
// exporters (from memory), and is loopback only.
func TestDefaultPortIsNoExportersWellKnown(t *testing.T) {
	host, port, err := net.SplitHostPort(DefaultListen)
	if err != nil {
		t.Fatal(err)
	}
	p, err := strconv.Atoi(port)
	if err != nil {
		t.Fatal(err)
	}
	if p >= 9100 && p <= 10000 || p == 9090 || p == 9091 || p == 9093 || p == 9094 {
		t.Errorf("default port %d is in the Prometheus default port allocations range", p)
	}
	if ip := net.ParseIP(host); ip == nil || !ip.IsLoopback() {
		t.Errorf("default listen %s is not loopback only", DefaultListen)
	}
}
