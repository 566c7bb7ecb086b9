package testenv

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"strings"
	"testing"
	"time"
)

// TestSharedServers checks that the servers started by scripts/testenv.sh
// answer: the broker accepts an MQTT CONNECT and the InfluxDB database
// accepts a write and returns it from a query.
func TestSharedServers(t *testing.T) {
	u, err := url.Parse(MQTT(t))
	if err != nil {
		t.Fatalf("MQTT url: %v", err)
	}
	mqttConnect(t, u.Host)

	s := Influx(t)
	if s.Bucket != s.DB+"/autogen" || s.Org != "-" {
		t.Fatalf("Influx() = %+v: want Bucket DB/autogen and Org -", s)
	}
	db := NewDatabase(t)
	roundTrip(t, db.URL, db.DB)
}

// TestPrivateServers starts private servers, stops and restarts them and
// checks that they come back on the same port with their data.
func TestPrivateServers(t *testing.T) {
	m := StartMosquitto(t)
	mqttConnect(t, m.Addr())
	m.Restart()
	mqttConnect(t, m.Addr())
	m.Stop()
	if err := dialOnce(m.Addr()); err == nil {
		t.Fatalf("broker still accepts connections after Stop")
	}
	m.Start()
	mqttConnect(t, m.Addr())

	p := StartInfluxWith(t, InfluxOptions{NoFlux: true})
	roundTrip(t, p.URL(), p.Server().DB)
	p.Stop()
	if err := ping(p.URL()); err == nil {
		t.Fatalf("influxd still answers after Stop")
	}
	p.Start()
	// The point written before the stop is still there after the start.
	if got := count(t, p.URL(), p.Server().DB); got != 1 {
		t.Fatalf("points after restart: got %d, want 1", got)
	}
}

// mqttConnect sends a minimal MQTT 3.1.1 CONNECT (OASIS MQTT 3.1.1 §3.1)
// and expects CONNACK with return code 0 (§3.2).
func mqttConnect(t *testing.T, addr string) {
	t.Helper()
	c, err := net.DialTimeout("tcp", addr, 5*time.Second)
	if err != nil {
		t.Fatalf("dial broker %s: %v", addr, err)
	}
	defer c.Close()
	_ = c.SetDeadline(time.Now().Add(5 * time.Second))
	id := "testenv-probe"
	vh := []byte{0, 4, 'M', 'Q', 'T', 'T', 4, 0x02, 0, 30}
	payload := append([]byte{0, byte(len(id))}, id...)
	pkt := append([]byte{0x10, byte(len(vh) + len(payload))}, vh...)
	pkt = append(pkt, payload...)
	if _, err := c.Write(pkt); err != nil {
		t.Fatalf("write CONNECT: %v", err)
	}
	ack := make([]byte, 4)
	if _, err := io.ReadFull(c, ack); err != nil {
		t.Fatalf("read CONNACK: %v", err)
	}
	if ack[0] != 0x20 || ack[3] != 0 {
		t.Fatalf("CONNACK = % x, want 20 02 xx 00", ack)
	}
}

func roundTrip(t *testing.T, base, db string) {
	t.Helper()
	resp, err := http.Post(base+"/write?db="+db, "text/plain",
		strings.NewReader("probe,sensor=S1 value=1.5 1700000000000000000\n"))
	if err != nil {
		t.Fatalf("write: %v", err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusNoContent {
		t.Fatalf("write: got %s, want 204", resp.Status)
	}
	if got := count(t, base, db); got != 1 {
		t.Fatalf("points: got %d, want 1", got)
	}
}

func count(t *testing.T, base, db string) int {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	q := url.Values{"db": {db}, "q": {"SELECT count(value) FROM probe"}}
	req, _ := http.NewRequestWithContext(ctx, http.MethodGet, base+"/query?"+q.Encode(), nil)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatalf("query: %v", err)
	}
	defer resp.Body.Close()
	line, _ := bufio.NewReader(resp.Body).ReadString('\n')
	// {"results":[{"statement_id":0,"series":[{"name":"probe","columns":["time","count"],"values":[["1970-01-01T00:00:00Z",1]]}]}]}
	var n int
	i := strings.LastIndex(line, ",")
	if i < 0 || !strings.Contains(line, `"count"`) {
		return 0
	}
	if _, err := fmt.Sscanf(line[i+1:], "%d]", &n); err != nil {
		t.Fatalf("query answer %q: %v", line, err)
	}
	return n
}
