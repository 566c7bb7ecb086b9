package mqtt

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"fmt"
	"io"
	"log/slog"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"testing"
	"time"

	mochi "github.com/mochi-mqtt/server/v2"
	"github.com/mochi-mqtt/server/v2/listeners"
	"github.com/mochi-mqtt/server/v2/packets"

	"plumbline/model/telemetry"
)

// pki writes a CA, a server certificate for 127.0.0.1 and a client
// certificate into dir, and returns the server's tls.Config that requires
// client certificates signed by the CA.
func pki(t *testing.T, dir string) *tls.Config {
	t.Helper()
	key := func() *ecdsa.PrivateKey {
		k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		if err != nil {
			t.Fatal(err)
		}
		return k
	}
	write := func(name, typ string, der []byte) {
		if err := os.WriteFile(filepath.Join(dir, name), pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
			t.Fatal(err)
		}
	}
	caKey := key()
	caTmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "test CA"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IsCA: true, BasicConstraintsValid: true, KeyUsage: x509.KeyUsageCertSign}
	caDER, err := x509.CreateCertificate(rand.Reader, caTmpl, caTmpl, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	ca, _ := x509.ParseCertificate(caDER)
	write("ca.pem", "CERTIFICATE", caDER)
	leaf := func(name string, serial int64, usage x509.ExtKeyUsage, ip bool) tls.Certificate {
		k := key()
		tmpl := &x509.Certificate{SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: name},
			NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
			KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{usage}}
		if ip {
			tmpl.IPAddresses = []net.IP{net.ParseIP("127.0.0.1")}
		}
		der, err := x509.CreateCertificate(rand.Reader, tmpl, ca, &k.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		kb, err := x509.MarshalECPrivateKey(k)
		if err != nil {
			t.Fatal(err)
		}
		write(name+".pem", "CERTIFICATE", der)
		write(name+".key", "EC PRIVATE KEY", kb)
		pair, err := tls.LoadX509KeyPair(filepath.Join(dir, name+".pem"), filepath.Join(dir, name+".key"))
		if err != nil {
			t.Fatal(err)
		}
		return pair
	}
	srv := leaf("server", 2, x509.ExtKeyUsageServerAuth, true)
	leaf("client", 3, x509.ExtKeyUsageClientAuth, false)
	pool := x509.NewCertPool()
	pool.AddCert(ca)
	return &tls.Config{Certificates: []tls.Certificate{srv}, ClientCAs: pool, ClientAuth: tls.RequireAndVerifyClientCert, MinVersion: tls.VersionTLS12}
}

// TestTLSClientCert connects over TLS with a private CA and a client
// certificate to a real (in-process) broker that requires one.
func TestTLSClientCert(t *testing.T) {
	dir := t.TempDir()
	srvTLS := pki(t, dir)
	srv := mochi.New(&mochi.Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil)), InlineClient: false})
	if err := srv.AddHook(new(allowAll), nil); err != nil {
		t.Fatal(err)
	}
	ln := listeners.NewTCP(listeners.Config{ID: "tls", Address: "127.0.0.1:0", TLSConfig: srvTLS})
	if err := srv.AddListener(ln); err != nil {
		t.Fatal(err)
	}
	if err := srv.Serve(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = srv.Close() }) // after the clients (see TestEmbeddedBroker)
	url := "ssl://" + ln.Address()

	sensors := []telemetry.Sensor{{ID: "P-1", Quantity: telemetry.Pressure, Topic: "s/P-1", Unit: "kPa"}}
	pipe := newPipe(t, sensors)
	sink := newCollector()
	c, err := New(Config{URL: url, ClientID: "tls-sub", CAFile: filepath.Join(dir, "ca.pem"),
		CertFile: filepath.Join(dir, "client.pem"), KeyFile: filepath.Join(dir, "client.key")}, pipe, sink, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	stop := runClient(t, c)
	waitConnected(t, c)
	// Publish over TLS too, with paho's own dialer and the same files.
	pubTLS, err := tlsConfig(Config{CAFile: filepath.Join(dir, "ca.pem"), CertFile: filepath.Join(dir, "client.pem"), KeyFile: filepath.Join(dir, "client.key")}, "127.0.0.1")
	if err != nil {
		t.Fatal(err)
	}
	pub := newTLSPublisher(t, url, pubTLS)
	now := time.Now().UTC().Add(-time.Minute)
	var msgs []message
	for i := 0; i < 50; i++ {
		msgs = append(msgs, message{"s/P-1", fmt.Sprintf(`{"value":%d,"time":%d}`, 98+i, now.Add(time.Duration(i)*time.Second).Unix())})
	}
	pub.publishAll(msgs, 50, nil)
	sink.waitFor(t, 50, 10*time.Second)
	stop()
	// 98.0665 kPa = 10 m of conventional water (NIST SP 811 (2008) App. B.8).
	r := sink.seen[key{"P-1", now.Unix() * 1e9}]
	if relDiff(r.Value, 98/9.80665) > 1e-12 {
		t.Errorf("98 kPa → %v m, want %v", r.Value, 98/9.80665)
	}

	// Without the client certificate the broker refuses the handshake;
	// the client keeps retrying and records why.
	c2, err := New(Config{URL: url, ClientID: "tls-nocert", CAFile: filepath.Join(dir, "ca.pem")}, pipe, sink, testLogger(t))
	if err != nil {
		t.Fatal(err)
	}
	stop2 := runClient(t, c2)
	deadline := time.Now().Add(10 * time.Second)
	for c2.Status().LastError == "" && time.Now().Before(deadline) {
		time.Sleep(20 * time.Millisecond)
	}
	st := c2.Status()
	stop2()
	if st.Connected || st.LastError == "" {
		t.Errorf("without a client certificate: %+v, want not connected with an error", st)
	}
}

// allowAll admits every client (the TLS layer does the checking here).
type allowAll struct{ mochi.HookBase }

func (*allowAll) ID() string { return "allow-all" }
func (*allowAll) Provides(b byte) bool {
	return b == mochi.OnConnectAuthenticate || b == mochi.OnACLCheck
}
func (*allowAll) OnConnectAuthenticate(*mochi.Client, packets.Packet) bool { return true }
func (*allowAll) OnACLCheck(*mochi.Client, string, bool) bool              { return true }
