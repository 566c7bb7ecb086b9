package main

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"fmt"
	"math/big"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"plumbline/internal/testenv"
)

// writeTestPKI writes a CA and a server certificate for 127.0.0.1 signed
// by it (ECDSA P-256, valid for a day) into dir and returns their paths.
func writeTestPKI(t *testing.T, dir string) (ca, cert, key string) {
	t.Helper()
	caKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	now := time.Now()
	caTmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "test CA"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(24 * time.Hour), IsCA: true, BasicConstraintsValid: true,
		KeyUsage: x509.KeyUsageCertSign}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caCert, _ := x509.ParseCertificate(caDER)
	srvKey, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	srvTmpl := &x509.Certificate{SerialNumber: big.NewInt(2), Subject: pkix.Name{CommonName: "127.0.0.1"},
		NotBefore: now.Add(-time.Hour), NotAfter: now.Add(24 * time.Hour), IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}
	srvDER, err := x509.CreateCertificate(rand.Reader, srvTmpl, caCert, &srvKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	keyDER, err := x509.MarshalECPrivateKey(srvKey)
	if err != nil {
		t.Fatal(err)
	}
	ca, cert, key = filepath.Join(dir, "ca.pem"), filepath.Join(dir, "server.crt"), filepath.Join(dir, "server.key")
	for path, b := range map[string]*pem.Block{ca: {Type: "CERTIFICATE", Bytes: caDER}, cert: {Type: "CERTIFICATE", Bytes: srvDER},
		key: {Type: "EC PRIVATE KEY", Bytes: keyDER}} {
		if err := os.WriteFile(path, pem.EncodeToMemory(b), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	return ca, cert, key
}

// exampleBroker is a Mosquitto process running configs/mosquitto.conf.example.
type exampleBroker struct {
	t    *testing.T
	bin  string
	conf string
	addr string
	cmd  *exec.Cmd
	done chan struct{}
}

func (b *exampleBroker) start() {
	b.t.Helper()
	cmd := exec.Command(b.bin, "-c", b.conf)
	log, err := os.OpenFile(b.conf+".out", os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		b.t.Fatal(err)
	}
	cmd.Stdout, cmd.Stderr = log, log
	if err := cmd.Start(); err != nil {
		b.t.Fatalf("mosquitto: %v", err)
	}
	b.cmd, b.done = cmd, make(chan struct{})
	done := b.done
	// The waiter belongs to this broker value; stop (and the cleanup)
	// ends the process.
	go func() { cmd.Wait(); log.Close(); close(done) }()
	deadline := time.Now().Add(20 * time.Second)
	for {
		c, err := net.DialTimeout("tcp", b.addr, time.Second)
		if err == nil {
			c.Close()
			return
		}
		select {
		case <-done:
			out, _ := os.ReadFile(b.conf + ".out")
			b.t.Fatalf("mosquitto exited on the example configuration:\n%s", out)
		default:
		}
		if time.Now().After(deadline) {
			b.t.Fatalf("mosquitto not listening on %s within 20 s", b.addr)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// stop ends the broker gracefully (it saves its persistence file).
func (b *exampleBroker) stop() {
	if b.cmd == nil {
		return
	}
	b.cmd.Process.Signal(syscall.SIGTERM)
	select {
	case <-b.done:
	case <-time.After(15 * time.Second):
		b.cmd.Process.Kill()
		<-b.done
	}
	b.cmd = nil
}

// The Mosquitto settings in configs/mosquitto.conf.example work as they
// say, on the real broker: the file loads, the TLS listener verifies
// against its CA, and a persistent QoS 1 session keeps every message
// published while its subscriber is away, across a broker restart, well
// beyond the 1000 messages Mosquitto's default queue would keep.
//
// The test runs the example as written except for its paths (a temporary
// folder), the listener (a free loopback port) and authentication
// (anonymous here: a password file needs mosquitto_passwd).
func TestMosquittoExample(t *testing.T) {
	bin := os.Getenv(testenv.EnvMosquitto)
	if bin == "" {
		t.Fatalf("%s is not set: run the tests under scripts/testenv.sh", testenv.EnvMosquitto)
	}
	text, err := os.ReadFile("../configs/mosquitto.conf.example")
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	ca, cert, key := writeTestPKI(t, dir)
	port := testenv.FreePort(t)
	conf := string(text)
	for old, repl := range map[string]string{
		"/var/lib/mosquitto/":                                    dir + "/",
		"/etc/mosquitto/tls/quillmere-ca.pem":                    ca,
		"/etc/mosquitto/tls/telemetry.quillmere.example.org.crt": cert,
		"/etc/mosquitto/tls/telemetry.quillmere.example.org.key": key,
		"\nlistener 8883\n":                                      fmt.Sprintf("\nlistener %d 127.0.0.1\n", port),
		"\nallow_anonymous false\n":                              "\nallow_anonymous true\n",
		"\npassword_file /etc/mosquitto/passwd\n":                "\n",
		"\nacl_file /etc/mosquitto/acl\n":                        "\n",
	} {
		if !strings.Contains(conf, old) {
			t.Fatalf("the example no longer has %q", strings.TrimSpace(old))
		}
		conf = strings.Replace(conf, old, repl, 1)
	}
	u := "root"
	if cur, err := user.Current(); err == nil {
		u = cur.Username
	}
	conf += fmt.Sprintf("user %s\nlog_dest file %s\n", u, filepath.Join(dir, "mosquitto.log"))
	path := filepath.Join(dir, "mosquitto.conf")
	if err := os.WriteFile(path, []byte(conf), 0o600); err != nil {
		t.Fatal(err)
	}
	b := &exampleBroker{t: t, bin: bin, conf: path, addr: fmt.Sprintf("127.0.0.1:%d", port)}
	b.start()
	t.Cleanup(b.stop)

	pool := x509.NewCertPool()
	pemCA, _ := os.ReadFile(ca)
	pool.AppendCertsFromPEM(pemCA)
	url := fmt.Sprintf("ssl://127.0.0.1:%d", port)
	connect := func(id string, clean bool, onMsg paho.MessageHandler) paho.Client {
		t.Helper()
		o := paho.NewClientOptions().AddBroker(url).SetClientID(id).SetCleanSession(clean).
			SetTLSConfig(&tls.Config{RootCAs: pool, MinVersion: tls.VersionTLS12}).SetKeepAlive(30 * time.Second)
		if onMsg != nil {
			o.SetDefaultPublishHandler(onMsg)
		}
		c := paho.NewClient(o)
		tok := c.Connect()
		if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
			t.Fatalf("connect %s over TLS: %v", id, tok.Error())
		}
		return c
	}
	var mu sync.Mutex
	got := map[string]bool{}
	onMsg := func(_ paho.Client, m paho.Message) {
		mu.Lock()
		got[string(m.Payload())] = true
		mu.Unlock()
	}
	sub := connect("example-sub", false, onMsg)
	if tok := sub.Subscribe("quillmere/#", 1, nil); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	sub.Disconnect(250)

	// 3000 messages while the subscriber is away: three times the
	// default queue limit.
	const n = 3000
	pub := connect("example-pub", true, nil)
	toks := make([]paho.Token, 0, n)
	for i := range n {
		toks = append(toks, pub.Publish("quillmere/central/P-central-01", 1, false, fmt.Sprint(i)))
	}
	for i, tok := range toks {
		if !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
			t.Fatalf("publish %d: %v", i, tok.Error())
		}
	}
	pub.Disconnect(250)
	b.stop()
	b.start()

	sub = connect("example-sub", false, onMsg)
	defer sub.Disconnect(250)
	deadline := time.Now().Add(20 * time.Second)
	for {
		mu.Lock()
		k := len(got)
		mu.Unlock()
		if k == n {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("after the broker restart the subscriber got %d of the %d messages queued for it", k, n)
		}
		time.Sleep(50 * time.Millisecond)
	}
}
