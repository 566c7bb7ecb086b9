package alerts

import (
	"math"
	"slices"
	"time"

	"plumbline/model/finding"
)

// Alert is one alert: one zone, kind and location cluster, from raising to
// clearing. Times are UTC; sizes L/s.
type Alert struct {
	ID       string       `json:"id"`
	Zone     string       `json:"zone"`
	Kind     finding.Kind `json:"kind"`
	State    State        `json:"state"`
	Severity Severity     `json:"severity"`
	// Route is the name of the route that took the alert ("" for none).
	Route string `json:"route,omitempty"`
	// Level is the escalation level reached (0 is the first).
	Level      int       `json:"level"`
	LevelSince time.Time `json:"level_since"`
	// Raised is when the alert was raised; Onset the earliest estimated
	// start of the event among its findings.
	Raised time.Time `json:"raised"`
	Onset  time.Time `json:"onset"`
	// LastEvidence is when the latest finding arrived (drives clear_after).
	LastEvidence time.Time `json:"last_evidence"`
	Updated      time.Time `json:"updated"`
	// SizeLPS and OpenFrac are the latest finding's; MaxSizeLPS the largest.
	SizeLPS    float64             `json:"size_lps,omitempty"`
	MaxSizeLPS float64             `json:"max_size_lps,omitempty"`
	OpenFrac   float64             `json:"open_fraction,omitempty"`
	Candidates []finding.Candidate `json:"candidates"`
	Evidence   string              `json:"evidence"`
	// Findings counts the findings merged into the alert.
	Findings int `json:"findings"`

	AckedBy      string    `json:"acked_by,omitempty"`
	AckedAt      time.Time `json:"acked_at,omitzero"`
	AckComment   string    `json:"ack_comment,omitempty"`
	ShelvedBy    string    `json:"shelved_by,omitempty"`
	ShelvedUntil time.Time `json:"shelved_until,omitzero"`
	ShelveReason string    `json:"shelve_reason,omitempty"`
	ClearedBy    string    `json:"cleared_by,omitempty"`
	ClearedAt    time.Time `json:"cleared_at,omitzero"`
	ClearReason  string    `json:"clear_reason,omitempty"`

	// NextRepeat is when the current level is notified again.
	NextRepeat time.Time `json:"next_repeat,omitzero"`
	// Notified lists the receivers notified so far (they hear of the end).
	Notified []string `json:"notified,omitempty"`
	// LastFeed is when feeds last heard of the alert; FeedDue marks a change
	// they have not heard of yet.
	LastFeed time.Time `json:"last_feed,omitzero"`
	FeedDue  bool      `json:"feed_due,omitempty"`
}

// clone returns a deep copy safe to hand out.
func (a *Alert) clone() Alert {
	c := *a
	c.Candidates = slices.Clone(a.Candidates)
	c.Notified = slices.Clone(a.Notified)
	return c
}

// Best returns the best candidate id, or "".
func (a *Alert) Best() string {
	if len(a.Candidates) == 0 {
		return ""
	}
	return a.Candidates[0].ID
}

// Locator gives a network element's position (WGS84 degrees), for
// clustering by distance. ok is false for unknown ids.
type Locator func(id string) (lon, lat float64, ok bool)

// sameEvent reports whether finding f belongs to alert a: same zone and
// kind, and the same estimated onset (the detector revising one finding's
// location as evidence grows), or a common id among both top-k candidate
// lists, or best candidates within maxDist metres (when loc is given). A
// finding or alert without candidates (a zone-wide event) matches any of
// its zone and kind.
func sameEvent(a *Alert, f finding.Finding, top int, maxDist float64, loc Locator) bool {
	if a.Zone != f.Zone || a.Kind != f.Kind {
		return false
	}
	if !f.Onset.IsZero() && f.Onset.Equal(a.Onset) {
		return true
	}
	if len(a.Candidates) == 0 || len(f.Candidates) == 0 {
		return true
	}
	ta, tf := a.Candidates[:min(top, len(a.Candidates))], f.Candidates[:min(top, len(f.Candidates))]
	for _, x := range ta {
		for _, y := range tf {
			if x.ID == y.ID {
				return true
			}
		}
	}
	if loc != nil && maxDist > 0 {
		lon1, lat1, ok1 := loc(a.Candidates[0].ID)
		lon2, lat2, ok2 := loc(f.Candidates[0].ID)
		if ok1 && ok2 && haversine(lon1, lat1, lon2, lat2) <= maxDist {
			return true
		}
	}
	return false
}

// earthRadiusM is the mean Earth radius (IUGG, Moritz 2000: 6371008.8 m).
const earthRadiusM = 6371008.8

// haversine is the great-circle distance in metres between two WGS84
// points given in degrees (haversine formula, Sinnott 1984).
func haversine(lon1, lat1, lon2, lat2 float64) float64 {
	rad := math.Pi / 180
	dlat := (lat2 - lat1) * rad
	dlon := (lon2 - lon1) * rad
	h := math.Sin(dlat/2)*math.Sin(dlat/2) + math.Cos(lat1*rad)*math.Cos(lat2*rad)*math.Sin(dlon/2)*math.Sin(dlon/2)
	return 2 * earthRadiusM * math.Asin(math.Min(1, math.Sqrt(h)))
}

// Notice is why a notification is sent.
type Notice string

// Notices, in the order an alert usually meets them.
const (
	// NoticeRaised: a new alert (or one re-announced after it returned).
	NoticeRaised Notice = "raised"
	// NoticeUpdated: the alert became more severe, or (feeds) its data changed.
	NoticeUpdated Notice = "updated"
	// NoticeEscalated: not acknowledged in time; the next level is told.
	NoticeEscalated Notice = "escalated"
	// NoticeRepeated: still not acknowledged; the current level is reminded.
	NoticeRepeated Notice = "repeated"
	// NoticeHandover tells a person who came on call (a rota handover) of
	// an unacknowledged alert at their level they had not heard of.
	NoticeHandover Notice = "handover"
	// NoticeAcknowledged: an operator acknowledged the alert.
	NoticeAcknowledged Notice = "acknowledged"
	// NoticeShelved: an operator shelved the alert for a time.
	NoticeShelved Notice = "shelved"
	// NoticeUnshelved: the shelf time ran out with the evidence still there.
	NoticeUnshelved Notice = "unshelved"
	// NoticeReturned: the evidence is gone but nobody acknowledged the alert.
	NoticeReturned Notice = "returned-to-normal"
	// NoticeCleared: the alert is closed.
	NoticeCleared Notice = "cleared"
	// NoticeSummary: what the hourly cap held back, in one message.
	NoticeSummary Notice = "summary"
)

// Recipient is the person a notification is for (nil for a feed).
type Recipient struct {
	ID    string `json:"id"`
	Name  string `json:"name,omitempty"`
	Email string `json:"email,omitempty"`
}

// Held is one notification kept back by the hourly cap, listed in the
// summary message.
type Held struct {
	Time     time.Time    `json:"time"`
	AlertID  string       `json:"alert"`
	Notice   Notice       `json:"notice"`
	Zone     string       `json:"zone"`
	Kind     finding.Kind `json:"kind"`
	Severity Severity     `json:"severity"`
}

// Notification is one message for one channel: what happened to which
// alert, for whom. It is stored in the outbox as JSON until delivered.
type Notification struct {
	// ID is unique and increasing across the store.
	ID      uint64    `json:"id"`
	Channel string    `json:"channel"`
	Notice  Notice    `json:"notice"`
	Time    time.Time `json:"time"`
	// To is the recipient; nil for a feed message (all changes).
	To *Recipient `json:"to,omitempty"`
	// Alert is a snapshot at the time of the notice (zero for a summary).
	Alert Alert `json:"alert"`
	// Levels is how many escalation levels the alert's route has.
	Levels int `json:"levels,omitempty"`
	// Link is the operator page for the alert (or the alert list).
	Link string `json:"link,omitempty"`
	// Actor and Comment say who did what, for operator actions.
	Actor   string `json:"actor,omitempty"`
	Comment string `json:"comment,omitempty"`
	// Held lists what the hourly cap kept back (summary only).
	Held []Held `json:"held,omitempty"`
}

// AuditRecord is one recorded change of an alert, with time and actor
// ("plumbline" for the service itself).
type AuditRecord struct {
	Time    time.Time `json:"time"`
	Alert   string    `json:"alert"`
	Actor   string    `json:"actor"`
	Event   Event     `json:"event"`
	From    State     `json:"from"`
	To      State     `json:"to"`
	Comment string    `json:"comment,omitempty"`
}

// DeliveryRecord is the outcome of one notification on its channel, as
// kept in the delivery log.
type DeliveryRecord struct {
	Time         time.Time `json:"time"`
	Notification uint64    `json:"notification"`
	Channel      string    `json:"channel"`
	Alert        string    `json:"alert,omitempty"`
	Notice       Notice    `json:"notice"`
	To           string    `json:"to,omitempty"`
	Attempts     int       `json:"attempts"`
	OK           bool      `json:"ok"`
	Error        string    `json:"error,omitempty"`
}
