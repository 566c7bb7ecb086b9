package mqtt

import (
	"bufio"
	"context"
	"crypto/tls"
	"fmt"
	"net"
	"net/url"
	"sync"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"golang.org/x/net/proxy"
)

// bufferedConn buffers both directions of a TCP or TLS broker connection.
//
// Reads: paho reads each packet's fixed header a byte at a time straight
// from the connection, one system call per byte; through the buffer a
// burst of messages costs a few reads.
//
// Writes: paho writes each packet (a 4-byte PUBACK per message) with its
// own system call. Writes are gathered and flushed at most flushDelay
// after the first unflushed one (or when the buffer fills), so a batch of
// acknowledgements leaves in a few segments. A failed flush is returned by
// the next Write. Close flushes within 100 ms, then closes; an
// acknowledgement lost that way is a redelivery, which the pipeline
// tolerates.
type bufferedConn struct {
	net.Conn
	r *bufio.Reader

	mu      sync.Mutex
	w       *bufio.Writer
	timer   *time.Timer
	pending bool
	err     error
	closed  bool

	closeOnce sync.Once
	closeErr  error
}

// flushDelay bounds how long a written packet may wait in the buffer.
const flushDelay = 200 * time.Microsecond

func newBufferedConn(conn net.Conn) *bufferedConn {
	c := &bufferedConn{Conn: conn, r: bufio.NewReaderSize(conn, 64<<10), w: bufio.NewWriterSize(conn, 16<<10)}
	c.timer = time.AfterFunc(time.Hour, c.flush)
	c.timer.Stop()
	return c
}

func (c *bufferedConn) Read(p []byte) (int, error) { return c.r.Read(p) }

func (c *bufferedConn) Write(p []byte) (int, error) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.err != nil {
		return 0, c.err
	}
	if c.closed {
		return 0, net.ErrClosed
	}
	n, err := c.w.Write(p)
	if err != nil {
		c.err = err
		return n, err
	}
	if !c.pending && c.w.Buffered() > 0 {
		c.pending = true
		c.timer.Reset(flushDelay)
	}
	return n, nil
}

func (c *bufferedConn) flush() {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.pending = false
	if c.err != nil || c.closed {
		return
	}
	if err := c.w.Flush(); err != nil {
		c.err = err
	}
}

func (c *bufferedConn) Close() error {
	c.closeOnce.Do(func() { c.closeErr = c.close() }) // paho may close twice, concurrently
	return c.closeErr
}

func (c *bufferedConn) close() error {
	// Give what is buffered (a DISCONNECT, the last acknowledgements) a
	// short deadline to leave; the deadline also unblocks a flush stuck
	// in a write, so taking the lock cannot hang.
	_ = c.Conn.SetWriteDeadline(time.Now().Add(100 * time.Millisecond))
	c.timer.Stop()
	c.mu.Lock()
	if !c.closed && c.err == nil {
		_ = c.w.Flush()
	}
	c.closed = true
	c.mu.Unlock()
	return c.Conn.Close()
}

// openConnection is paho's CustomOpenConnectionFn: it dials like paho
// (proxy from the environment for TCP, TLS with the configured tls.Config,
// paho's websocket for ws/wss) and buffers reads.
func openConnection(u *url.URL, o paho.ClientOptions) (net.Conn, error) {
	dialer := &net.Dialer{Timeout: o.ConnectTimeout}
	var conn net.Conn
	var err error
	switch u.Scheme {
	case "ws", "wss":
		d := *u
		d.User = nil
		var tc *tls.Config
		if u.Scheme == "wss" {
			tc = o.TLSConfig
		}
		conn, err = paho.NewWebsocket(d.String(), tc, o.ConnectTimeout, o.HTTPHeaders, o.WebsocketOptions)
	case "tcp", "mqtt":
		conn, err = proxy.FromEnvironmentUsing(dialer).Dial("tcp", u.Host)
	case "ssl", "tls", "mqtts", "tcps":
		conn, err = proxy.FromEnvironmentUsing(dialer).Dial("tcp", u.Host)
		if err == nil {
			tc := tls.Client(conn, o.TLSConfig)
			ctx, cancel := context.WithTimeout(context.Background(), o.ConnectTimeout)
			err = tc.HandshakeContext(ctx)
			cancel()
			if err != nil {
				_ = conn.Close()
				return nil, fmt.Errorf("TLS handshake with %s: %w", u.Host, err)
			}
			conn = tc
		}
	default:
		return nil, fmt.Errorf("scheme %q not supported", u.Scheme)
	}
	if err != nil {
		return nil, err
	}
	if u.Scheme == "ws" || u.Scheme == "wss" {
		// The websocket connection's deadlines are not safe beside a
		// write in progress: buffer reads only.
		return &readBuffered{Conn: conn, r: bufio.NewReaderSize(conn, 64<<10)}, nil
	}
	return newBufferedConn(conn), nil
}

// readBuffered buffers reads only (see bufferedConn).
type readBuffered struct {
	net.Conn
	r *bufio.Reader
}

func (c *readBuffered) Read(p []byte) (int, error) { return c.r.Read(p) }
