package alerts

import (
	"bytes"
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"time"
)

// Webhook headers. The signature is HMAC-SHA256 with the shared secret
// over the timestamp header value, a dot, and the exact body bytes,
// written "sha256=" followed by lower-case hex. Receivers should reject a
// timestamp far from their clock (replay) and may drop a repeated
// notification id (delivery is at-least-once).
const (
	HeaderSignature    = "X-Plumbline-Signature"
	HeaderTimestamp    = "X-Plumbline-Timestamp"
	HeaderNotification = "X-Plumbline-Notification"
)

// Webhook posts each notification as JSON (Payload) to one URL.
type Webhook struct {
	url    string
	secret []byte
	client *http.Client
	now    func() time.Time
}

// NewWebhook returns the webhook channel. client may be nil (a client
// without redirects is made; the dispatcher's context sets the timeout).
func NewWebhook(cfg WebhookConfig, secret []byte, client *http.Client) (*Webhook, error) {
	if cfg.URL == "" {
		return nil, errors.New("alerts: webhook: missing url")
	}
	if len(secret) == 0 {
		return nil, errors.New("alerts: webhook: empty secret")
	}
	if client == nil {
		client = &http.Client{CheckRedirect: func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }}
	}
	return &Webhook{url: cfg.URL, secret: bytes.Clone(secret), client: client, now: time.Now}, nil
}

// Name returns "webhook".
func (w *Webhook) Name() string { return ChannelWebhook }

// Sign returns the signature header value for timestamp ts and body.
func Sign(secret []byte, ts string, body []byte) string {
	mac := hmac.New(sha256.New, secret)
	mac.Write([]byte(ts))
	mac.Write([]byte("."))
	mac.Write(body)
	return "sha256=" + hex.EncodeToString(mac.Sum(nil))
}

// Send posts n. A 2xx answer is success; 408, 429 and 5xx are retried;
// any other answer is a permanent failure.
func (w *Webhook) Send(ctx context.Context, n Notification) error {
	body, err := MarshalPayload(n)
	if err != nil {
		return Permanent(fmt.Errorf("webhook: notification %d: %w", n.ID, err))
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, w.url, bytes.NewReader(body))
	if err != nil {
		return Permanent(fmt.Errorf("webhook: %w", err))
	}
	ts := strconv.FormatInt(w.now().Unix(), 10)
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("User-Agent", "plumbline-alerts/1")
	req.Header.Set(HeaderTimestamp, ts)
	req.Header.Set(HeaderSignature, Sign(w.secret, ts, body))
	req.Header.Set(HeaderNotification, strconv.FormatUint(n.ID, 10))
	resp, err := w.client.Do(req)
	if err != nil {
		return fmt.Errorf("webhook: notification %d: %w", n.ID, err)
	}
	io.Copy(io.Discard, io.LimitReader(resp.Body, 64<<10))
	resp.Body.Close()
	switch c := resp.StatusCode; {
	case c >= 200 && c < 300:
		return nil
	case c == http.StatusRequestTimeout || c == http.StatusTooManyRequests || c >= 500:
		return fmt.Errorf("webhook: notification %d: %s", n.ID, resp.Status)
	default:
		return Permanent(fmt.Errorf("webhook: notification %d: %s", n.ID, resp.Status))
	}
}
