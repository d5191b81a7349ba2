package metrics

import (
	"io"
	"log/slog"
	"net"
	"testing"
	"time"
)

func TestConnBounds(t *testing.T) {
	for _, c := range []struct {
		nofile           uint64
		total, perClient int
	}{
		{128, 32, 8},
		{1024, 256, 32},
		{1 << 20, 512, 32},
		{8, 4, 4},
	} {
		if total, per := connBounds(c.nofile); total != c.total || per != c.perClient {
			t.Errorf("connBounds(%d) = %d, %d; want %d, %d", c.nofile, total, per, c.total, c.perClient)
		}
	}
}

// TestBoundedListener (issue 17, item 3): a client past its bound is
// closed at once; past the total bound the listener stops accepting until
// a connection closes.
func TestBoundedListener(t *testing.T) {
	inner, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	l := newBoundedListener(inner, 3, 2, slog.New(slog.DiscardHandler))
	defer l.Close()
	accepted := make(chan net.Conn, 10)
	go func() {
		for {
			c, err := l.Accept()
			if err != nil {
				close(accepted)
				return
			}
			accepted <- c
		}
	}()
	dial := func(from string) net.Conn {
		d := net.Dialer{LocalAddr: &net.TCPAddr{IP: net.ParseIP(from)}}
		c, err := d.Dial("tcp", inner.Addr().String())
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	take := func(what string) net.Conn {
		select {
		case c := <-accepted:
			return c
		case <-time.After(2 * time.Second):
			t.Fatalf("%s not accepted", what)
			return nil
		}
	}
	dial("127.0.0.1")
	dial("127.0.0.1")
	first := take("first connection")
	take("second connection")
	// The third from the same address is closed by the listener.
	c := dial("127.0.0.1")
	c.SetReadDeadline(time.Now().Add(2 * time.Second))
	if _, err := c.Read(make([]byte, 1)); err != io.EOF {
		t.Errorf("third connection from one client: read %v, want EOF (closed at once)", err)
	}
	// Another client fills the total bound; a fourth waits until one of
	// the three closes.
	dial("127.0.0.2")
	take("another client's connection")
	dial("127.0.0.3")
	select {
	case <-accepted:
		t.Fatal("a connection past the total bound accepted")
	case <-time.After(300 * time.Millisecond):
	}
	first.Close()
	take("the waiting connection, once a slot was free")
}
