package broker

import (
	"strings"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/rs/zerolog"
)

func TestStartAndClose(t *testing.T) {
	b, err := Start(Config{}, zerolog.New(zerolog.NewTestWriter(t)))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(b.URL(), "tcp://127.0.0.1:") || strings.HasSuffix(b.URL(), ":0") {
		t.Errorf("URL() = %q, want tcp://127.0.0.1:<port>", b.URL())
	}
	// A real client connects, subscribes and gets its own message back.
	got := make(chan string, 1)
	cl := paho.NewClient(paho.NewClientOptions().AddBroker(b.URL()).SetClientID("t1"))
	if tok := cl.Connect(); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatalf("connect: %v", tok.Error())
	}
	tok := cl.Subscribe("a/#", 1, func(_ paho.Client, m paho.Message) { got <- string(m.Payload()) })
	if !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	if tok := cl.Publish("a/b", 1, false, "hello"); !tok.WaitTimeout(5*time.Second) || tok.Error() != nil {
		t.Fatalf("publish: %v", tok.Error())
	}
	select {
	case p := <-got:
		if p != "hello" {
			t.Errorf("payload %q", p)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("no message back")
	}
	if s := b.Stats(); s.ClientsConnected != 1 || s.MessagesReceived < 1 {
		t.Errorf("stats %+v", s)
	}
	cl.Disconnect(100)
	if err := b.Close(); err != nil {
		t.Fatal(err)
	}
	if err := b.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
}

func TestLoopbackOnly(t *testing.T) {
	if _, err := Start(Config{Address: "0.0.0.0:0"}, zerolog.Nop()); err == nil || !strings.Contains(err.Error(), "loopback") {
		t.Errorf("Start on 0.0.0.0: %v, want a loopback error", err)
	}
	if _, err := Start(Config{Address: "nonsense"}, zerolog.Nop()); err == nil {
		t.Error("Start on a bad address: no error")
	}
	cases := map[string]bool{
		"127.0.0.1:5000": true, "127.8.9.10:1": true, "[::1]:1883": true,
		"10.0.0.7:5000": false, "[2001:db8::1]:1883": false, "192.168.1.2:1": false, "": false,
	}
	for remote, want := range cases {
		if got := isLoopback(remote); got != want {
			t.Errorf("isLoopback(%q) = %v, want %v", remote, got, want)
		}
	}
}
