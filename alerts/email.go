package alerts

import (
	"bytes"
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"mime"
	"mime/quotedprintable"
	"net"
	"net/mail"
	"os"
	"strconv"
	"strings"

	"github.com/emersion/go-sasl"
	"github.com/emersion/go-smtp"
)

// Email sends each person's notifications as plain-text mail over SMTP,
// with STARTTLS and PLAIN authentication when configured.
type Email struct {
	cfg      SMTPConfig
	password []byte
	tls      *tls.Config
}

// NewEmail returns the email channel. tlsConfig may be nil (system roots,
// plus cfg.CAFile if set; server name from cfg.Host).
func NewEmail(cfg SMTPConfig, password []byte, tlsConfig *tls.Config) (*Email, error) {
	if cfg.Host == "" || cfg.From == "" {
		return nil, errors.New("alerts: smtp: host and from are required")
	}
	if cfg.Port == 0 {
		cfg.Port = 587
	}
	if tlsConfig == nil {
		tlsConfig = &tls.Config{ServerName: cfg.Host, MinVersion: tls.VersionTLS12}
		if cfg.CAFile != "" {
			pem, err := os.ReadFile(cfg.CAFile)
			if err != nil {
				return nil, fmt.Errorf("alerts: smtp: ca_file: %w", err)
			}
			pool := x509.NewCertPool()
			if !pool.AppendCertsFromPEM(pem) {
				return nil, fmt.Errorf("alerts: smtp: ca_file %s: no PEM certificate", cfg.CAFile)
			}
			tlsConfig.RootCAs = pool
		}
	}
	return &Email{cfg: cfg, password: bytes.Clone(password), tls: tlsConfig}, nil
}

// Name returns "email".
func (e *Email) Name() string { return ChannelEmail }

// Send mails n to its recipient. A 5xx SMTP answer is permanent; 4xx and
// network errors are retried.
func (e *Email) Send(ctx context.Context, n Notification) error {
	if n.To == nil || n.To.Email == "" {
		return Permanent(fmt.Errorf("email: notification %d has no address", n.ID))
	}
	msg, err := FormatEmail(e.cfg.From, n)
	if err != nil {
		return Permanent(err)
	}
	addr := net.JoinHostPort(e.cfg.Host, strconv.Itoa(e.cfg.Port))
	var d net.Dialer
	conn, err := d.DialContext(ctx, "tcp", addr)
	if err != nil {
		return fmt.Errorf("email: %s: %w", addr, err)
	}
	if dl, ok := ctx.Deadline(); ok {
		conn.SetDeadline(dl)
	}
	stop := context.AfterFunc(ctx, func() { conn.Close() })
	defer stop()
	var c *smtp.Client
	if e.cfg.StartTLS {
		c, err = smtp.NewClientStartTLS(conn, e.tls)
		if err != nil {
			conn.Close()
			return classifySMTP(fmt.Errorf("email: %s: starttls: %w", addr, err))
		}
	} else {
		c = smtp.NewClient(conn)
	}
	defer c.Close()
	if e.cfg.Username != "" {
		if err := c.Auth(sasl.NewPlainClient("", e.cfg.Username, string(e.password))); err != nil {
			return classifySMTP(fmt.Errorf("email: %s: auth as %s: %w", addr, e.cfg.Username, err))
		}
	}
	envFrom := e.cfg.From
	if a, err := mail.ParseAddress(e.cfg.From); err == nil {
		envFrom = a.Address
	}
	if err := c.SendMail(envFrom, []string{n.To.Email}, bytes.NewReader(msg)); err != nil {
		return classifySMTP(fmt.Errorf("email: %s: to %s: %w", addr, n.To.Email, err))
	}
	if err := c.Quit(); err != nil {
		// The message was accepted; a failed QUIT does not undo it.
		return nil
	}
	return nil
}

// classifySMTP marks 5xx answers permanent.
func classifySMTP(err error) error {
	var se *smtp.SMTPError
	if errors.As(err, &se) && se.Code >= 500 {
		return Permanent(err)
	}
	return err
}

// FormatEmail builds the RFC 5322 message for n: UTF-8 plain text in
// quoted-printable, subject from Subject, body from TextBody.
func FormatEmail(from string, n Notification) ([]byte, error) {
	fromAddr, err := mail.ParseAddress(from)
	if err != nil {
		return nil, fmt.Errorf("email: from %q: %w", from, err)
	}
	to := &mail.Address{Address: n.To.Email, Name: n.To.Name}
	domain := "plumbline.invalid"
	if i := strings.LastIndex(fromAddr.Address, "@"); i >= 0 {
		domain = fromAddr.Address[i+1:]
	}
	var b bytes.Buffer
	h := func(k, v string) { b.WriteString(k + ": " + v + "\r\n") }
	h("From", fromAddr.String())
	h("To", to.String())
	h("Subject", mime.QEncoding.Encode("utf-8", Subject(n)))
	h("Date", n.Time.UTC().Format("Mon, 02 Jan 2006 15:04:05 -0700"))
	h("Message-ID", fmt.Sprintf("<notification-%d.%s@%s>", n.ID, n.Alert.ID, domain))
	if n.Alert.ID != "" {
		h("X-Plumbline-Alert", n.Alert.ID)
	}
	h("MIME-Version", "1.0")
	h("Content-Type", "text/plain; charset=utf-8")
	h("Content-Transfer-Encoding", "quoted-printable")
	b.WriteString("\r\n")
	qp := quotedprintable.NewWriter(&b)
	if _, err := qp.Write([]byte(TextBody(n))); err != nil {
		return nil, err
	}
	if err := qp.Close(); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}
