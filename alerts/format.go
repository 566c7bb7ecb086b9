package alerts

import (
	"encoding/json"
	"fmt"
	"strings"
	"time"

	"plumbline/model/finding"
)

// clockUTC formats t for a person: date, time and zone, minute precision.
func clockUTC(t time.Time) string {
	if t.IsZero() {
		return "unknown"
	}
	return t.UTC().Format("2006-01-02 15:04 UTC")
}

// headline is the alert in a few words: "URGENT leak in zone north".
func headline(a Alert) string {
	return fmt.Sprintf("%s %s in zone %s", strings.ToUpper(string(a.Severity)), a.Kind, a.Zone)
}

// noticeLead says what happened, before the headline.
func noticeLead(n Notification) string {
	a := n.Alert
	switch n.Notice {
	case NoticeRaised:
		return "NEW"
	case NoticeUpdated:
		return "UPDATED"
	case NoticeEscalated:
		return fmt.Sprintf("ESCALATED to level %d of %d, not acknowledged", a.Level+1, n.Levels)
	case NoticeRepeated:
		return "REMINDER, not acknowledged"
	case NoticeHandover:
		return "HANDED OVER to you, not acknowledged"
	case NoticeAcknowledged:
		return "ACKNOWLEDGED by " + n.Actor
	case NoticeShelved:
		return fmt.Sprintf("SHELVED by %s until %s", n.Actor, clockUTC(a.ShelvedUntil))
	case NoticeUnshelved:
		return "SHELF TIME OVER, still active"
	case NoticeReturned:
		return "RETURNED TO NORMAL, still needs acknowledgement"
	case NoticeCleared:
		return "CLEARED"
	}
	return strings.ToUpper(string(n.Notice))
}

// Subject is the one-line summary used as email subject and log message
// text: what happened, severity, kind, zone, size and best location.
func Subject(n Notification) string {
	if n.Notice == NoticeSummary {
		return fmt.Sprintf("plumbline: %d alert notifications held back by the hourly limit", len(n.Held))
	}
	a := n.Alert
	s := fmt.Sprintf("[%s] %s: %s in zone %s", strings.ToUpper(string(a.Severity)), noticeLead(n), a.Kind, a.Zone)
	if m := measure(a); m != "" {
		s += ", " + m
	}
	if b := a.Best(); b != "" {
		s += ", best " + b
	}
	return s + " (" + a.ID + ")"
}

// measure is the size of the event in its kind's terms.
func measure(a Alert) string {
	switch a.Kind {
	case finding.Leak:
		if a.SizeLPS > 0 {
			return fmt.Sprintf("%.1f L/s", a.SizeLPS)
		}
	case finding.Blockage:
		if a.OpenFrac > 0 {
			return fmt.Sprintf("%.0f%% open", 100*a.OpenFrac)
		}
	}
	return ""
}

// candidateLabel names what the candidates of a kind are.
func candidateLabel(k finding.Kind) string {
	switch k {
	case finding.Blockage:
		return "Best candidate pipes"
	case finding.SensorFault:
		return "Sensors"
	}
	return "Best candidate locations"
}

// maxCandidatesInText is how many candidates a text message lists.
const maxCandidatesInText = 5

// TextBody is the plain-text message a person can act on from a phone:
// what happened, zone, kind, size, since when, the best candidate
// locations, the evidence, and the link to the operator page.
func TextBody(n Notification) string {
	var b strings.Builder
	if n.Notice == NoticeSummary {
		fmt.Fprintf(&b, "%d alert notifications were held back by the hourly limit:\n\n", len(n.Held))
		for _, h := range n.Held {
			fmt.Fprintf(&b, "  %s  %s  %s %s %s in zone %s\n", h.Time.UTC().Format("15:04"), h.AlertID, h.Notice, h.Severity, h.Kind, h.Zone)
		}
		if n.Link != "" {
			fmt.Fprintf(&b, "\nAll alerts: %s\n", n.Link)
		}
		return b.String()
	}
	a := n.Alert
	fmt.Fprintf(&b, "%s: %s\n", noticeLead(n), headline(a))
	fmt.Fprintf(&b, "State: %s\n\n", a.State)
	switch a.Kind {
	case finding.Leak:
		fmt.Fprintf(&b, "Size: %.1f L/s", a.SizeLPS)
		if a.MaxSizeLPS > a.SizeLPS {
			fmt.Fprintf(&b, " (largest %.1f L/s)", a.MaxSizeLPS)
		}
		b.WriteString("\n")
	case finding.Blockage:
		if a.OpenFrac > 0 {
			fmt.Fprintf(&b, "Open: about %.0f%% of normal\n", 100*a.OpenFrac)
		}
	}
	fmt.Fprintf(&b, "Since: %s (estimated start)\n", clockUTC(a.Onset))
	fmt.Fprintf(&b, "Raised: %s\n", clockUTC(a.Raised))
	if len(a.Candidates) > 0 {
		fmt.Fprintf(&b, "%s:\n", candidateLabel(a.Kind))
		for i, c := range a.Candidates {
			if i == maxCandidatesInText {
				fmt.Fprintf(&b, "  and %d more\n", len(a.Candidates)-i)
				break
			}
			fmt.Fprintf(&b, "  %d. %s (score %.2f)\n", i+1, c.ID, c.Score)
		}
	}
	if a.Evidence != "" {
		fmt.Fprintf(&b, "Evidence: %s\n", a.Evidence)
	}
	if n.Comment != "" {
		fmt.Fprintf(&b, "Comment: %s\n", n.Comment)
	}
	if n.Levels > 1 {
		fmt.Fprintf(&b, "Escalation: level %d of %d\n", a.Level+1, n.Levels)
	}
	fmt.Fprintf(&b, "\nAlert %s.", a.ID)
	if n.Link != "" {
		fmt.Fprintf(&b, " Acknowledge, shelve or clear it here:\n%s\n", n.Link)
	} else {
		b.WriteString("\n")
	}
	return b.String()
}

// Payload is the JSON body of webhook and MQTT messages. Version changes
// only when a field changes meaning.
type Payload struct {
	Version      int        `json:"version"`
	Notification uint64     `json:"notification"`
	Notice       Notice     `json:"notice"`
	Time         time.Time  `json:"time"`
	To           *Recipient `json:"to,omitempty"`
	Summary      string     `json:"summary"`
	Alert        *AlertView `json:"alert,omitempty"`
	Actor        string     `json:"actor,omitempty"`
	Comment      string     `json:"comment,omitempty"`
	Held         []Held     `json:"held,omitempty"`
	Link         string     `json:"link,omitempty"`
}

// AlertView is the alert as outside systems see it.
type AlertView struct {
	ID           string              `json:"id"`
	Zone         string              `json:"zone"`
	Kind         finding.Kind        `json:"kind"`
	State        State               `json:"state"`
	Severity     Severity            `json:"severity"`
	SizeLPS      float64             `json:"size_lps,omitempty"`
	OpenFrac     float64             `json:"open_fraction,omitempty"`
	Onset        time.Time           `json:"onset,omitzero"`
	Raised       time.Time           `json:"raised"`
	Updated      time.Time           `json:"updated"`
	Candidates   []finding.Candidate `json:"candidates"`
	Evidence     string              `json:"evidence,omitempty"`
	Level        int                 `json:"level"`
	Levels       int                 `json:"levels"`
	AckedBy      string              `json:"acked_by,omitempty"`
	ShelvedUntil time.Time           `json:"shelved_until,omitzero"`
}

// PayloadOf builds the JSON payload of n.
func PayloadOf(n Notification) Payload {
	p := Payload{Version: 1, Notification: n.ID, Notice: n.Notice, Time: n.Time.UTC(), To: n.To, Summary: Subject(n), Actor: n.Actor, Comment: n.Comment, Held: n.Held, Link: n.Link}
	if n.Notice != NoticeSummary {
		a := n.Alert
		cands := a.Candidates
		if cands == nil {
			cands = []finding.Candidate{}
		}
		p.Alert = &AlertView{ID: a.ID, Zone: a.Zone, Kind: a.Kind, State: a.State, Severity: a.Severity, SizeLPS: a.SizeLPS, OpenFrac: a.OpenFrac, Onset: a.Onset, Raised: a.Raised, Updated: a.Updated, Candidates: cands, Evidence: a.Evidence, Level: a.Level + 1, Levels: n.Levels, AckedBy: a.AckedBy, ShelvedUntil: a.ShelvedUntil}
	}
	return p
}

// MarshalPayload is the JSON encoding of PayloadOf(n), indented for
// people reading the wire.
func MarshalPayload(n Notification) ([]byte, error) {
	return json.MarshalIndent(PayloadOf(n), "", "  ")
}
