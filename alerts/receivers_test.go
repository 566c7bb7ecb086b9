package alerts

import (
	"bytes"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/hmac"
	"crypto/rand"
	"crypto/sha256"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/hex"
	"encoding/json"
	"encoding/pem"
	"io"
	"math/big"
	"mime/quotedprintable"
	"net"
	"net/http"
	"net/http/httptest"
	"net/mail"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"testing"
	"time"

	"github.com/emersion/go-sasl"
	"github.com/emersion/go-smtp"
)

// testClock is a controllable clock shared by the test and the Manager.
type testClock struct {
	mu sync.Mutex
	t  time.Time
}

func (c *testClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *testClock) Set(t time.Time) {
	c.mu.Lock()
	c.t = t
	c.mu.Unlock()
}

// syncBuffer is a bytes.Buffer safe for a logger and a reader.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// waitFor polls cond until it holds or 15 s pass.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(15 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// hookReceiver is a real HTTP server that checks the webhook signature
// with its own HMAC-SHA256 (crypto/hmac, RFC 2104) and records payloads.
type hookReceiver struct {
	srv    *httptest.Server
	secret []byte
	mu     sync.Mutex
	got    []Payload
	bad    int // requests with a wrong or missing signature
	fail   int // answer 503 to this many requests first
	status int // if set, answer every request with this status
	calls  int
}

func newHookReceiver(t *testing.T, secret []byte) *hookReceiver {
	h := &hookReceiver{secret: secret}
	h.srv = httptest.NewServer(http.HandlerFunc(h.serve))
	t.Cleanup(h.srv.Close)
	return h
}

func (h *hookReceiver) serve(w http.ResponseWriter, r *http.Request) {
	body, _ := io.ReadAll(r.Body)
	h.mu.Lock()
	defer h.mu.Unlock()
	h.calls++
	ts := r.Header.Get("X-Plumbline-Timestamp")
	mac := hmac.New(sha256.New, h.secret)
	mac.Write([]byte(ts + "." + string(body)))
	want := "sha256=" + hex.EncodeToString(mac.Sum(nil))
	sec, err := strconv.ParseInt(ts, 10, 64)
	if err != nil || time.Since(time.Unix(sec, 0)).Abs() > 5*time.Minute ||
		!hmac.Equal([]byte(r.Header.Get("X-Plumbline-Signature")), []byte(want)) ||
		r.Header.Get("Content-Type") != "application/json" || r.Method != http.MethodPost {
		h.bad++
		http.Error(w, "bad signature", http.StatusUnauthorized)
		return
	}
	if h.status != 0 {
		w.WriteHeader(h.status)
		return
	}
	if h.fail > 0 {
		h.fail--
		http.Error(w, "busy", http.StatusServiceUnavailable)
		return
	}
	var p Payload
	if err := json.Unmarshal(body, &p); err != nil {
		http.Error(w, err.Error(), http.StatusBadRequest)
		return
	}
	h.got = append(h.got, p)
	w.WriteHeader(http.StatusNoContent)
}

func (h *hookReceiver) payloads() []Payload {
	h.mu.Lock()
	defer h.mu.Unlock()
	return append([]Payload(nil), h.got...)
}

// testCert makes a self-signed certificate for 127.0.0.1 and writes its
// PEM to a file for the client's ca_file.
func testCert(t *testing.T) (tls.Certificate, string) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(1),
		Subject:               pkix.Name{CommonName: "mail.test"},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		KeyUsage:              x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		IPAddresses:           []net.IP{net.ParseIP("127.0.0.1")},
		DNSNames:              []string{"localhost"},
		IsCA:                  true,
		BasicConstraintsValid: true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "ca.pem")
	if err := os.WriteFile(path, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	return tls.Certificate{Certificate: [][]byte{der}, PrivateKey: key}, path
}

// mailMsg is one message received by the test SMTP server.
type mailMsg struct {
	From, To  string
	TLS       bool
	User      string
	Header    mail.Header
	Body      string
	RawHeader string
}

// smtpReceiver is a real SMTP server (go-smtp) offering STARTTLS and
// PLAIN authentication only over TLS.
type smtpReceiver struct {
	addr     string
	port     int
	caFile   string
	user     string
	password string
	mu       sync.Mutex
	msgs     []mailMsg
	rejectTo string // answer 550 for this recipient
}

func newSMTPReceiver(t *testing.T, user, password string) *smtpReceiver {
	t.Helper()
	cert, caFile := testCert(t)
	r := &smtpReceiver{caFile: caFile, user: user, password: password}
	s := smtp.NewServer(smtp.BackendFunc(func(c *smtp.Conn) (smtp.Session, error) { return &smtpSession{r: r, conn: c}, nil }))
	s.Domain = "mail.test"
	s.TLSConfig = &tls.Config{Certificates: []tls.Certificate{cert}}
	s.AllowInsecureAuth = false
	s.ReadTimeout = 10 * time.Second
	s.WriteTimeout = 10 * time.Second
	s.ErrorLog = nopLogger{}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	r.addr = l.Addr().String()
	r.port = l.Addr().(*net.TCPAddr).Port
	go s.Serve(l)
	t.Cleanup(func() { s.Close() })
	return r
}

func (r *smtpReceiver) messages() []mailMsg {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]mailMsg(nil), r.msgs...)
}

type nopLogger struct{}

func (nopLogger) Printf(string, ...interface{}) {}
func (nopLogger) Println(...interface{})        {}

type smtpSession struct {
	r    *smtpReceiver
	conn *smtp.Conn
	user string
	from string
	to   string
}

func (s *smtpSession) AuthMechanisms() []string { return []string{sasl.Plain} }

func (s *smtpSession) Auth(mech string) (sasl.Server, error) {
	return sasl.NewPlainServer(func(identity, username, password string) error {
		if username != s.r.user || password != s.r.password {
			return smtp.ErrAuthFailed
		}
		s.user = username
		return nil
	}), nil
}

func (s *smtpSession) Mail(from string, _ *smtp.MailOptions) error {
	if s.user == "" {
		return smtp.ErrAuthRequired
	}
	s.from = from
	return nil
}

func (s *smtpSession) Rcpt(to string, _ *smtp.RcptOptions) error {
	if to == s.r.rejectTo {
		return &smtp.SMTPError{Code: 550, EnhancedCode: smtp.EnhancedCode{5, 1, 1}, Message: "no such mailbox"}
	}
	s.to = to
	return nil
}

func (s *smtpSession) Data(r io.Reader) error {
	m, err := mail.ReadMessage(r)
	if err != nil {
		return err
	}
	body, err := io.ReadAll(quotedprintable.NewReader(m.Body))
	if err != nil {
		return err
	}
	_, isTLS := s.conn.TLSConnectionState()
	s.r.mu.Lock()
	s.r.msgs = append(s.r.msgs, mailMsg{From: s.from, To: s.to, TLS: isTLS, User: s.user, Header: m.Header, Body: string(body)})
	s.r.mu.Unlock()
	return nil
}

func (s *smtpSession) Reset()        {}
func (s *smtpSession) Logout() error { return nil }
