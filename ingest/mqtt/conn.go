package mqtt

import (
	"bufio"
	"context"
	"crypto/tls"
	"fmt"
	"net"
	"net/url"

	paho "github.com/eclipse/paho.mqtt.golang"
	"golang.org/x/net/proxy"
)

// bufferedConn reads through a buffer. paho reads each packet's fixed
// header a byte at a time straight from the connection, one system call
// per byte; with the buffer a burst of messages costs a few reads. Writes
// and deadlines go to the connection unchanged.
type bufferedConn struct {
	net.Conn
	r *bufio.Reader
}

func (c *bufferedConn) Read(p []byte) (int, error) { return c.r.Read(p) }

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
	return &bufferedConn{Conn: conn, r: bufio.NewReaderSize(conn, 64<<10)}, nil
}
