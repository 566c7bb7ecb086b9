package alerts

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Bucket names of the alert store (data_dir/alerts.db).
var (
	bucketAlerts     = []byte("alerts")
	bucketAudit      = []byte("audit")
	bucketOutbox     = []byte("outbox")
	bucketDeliveries = []byte("deliveries")
	bucketPeople     = []byte("people")
	bucketMeta       = []byte("meta")
	keyLastTick      = []byte("last_tick")
)

// deliveryLogLimit is how many delivery records are kept (the oldest go).
const deliveryLogLimit = 100000

// store is the durable state: alerts, per-person cap windows, the audit
// log, the outbox of notifications not yet delivered and the delivery log.
// bbolt fsyncs each transaction before Update returns.
type store struct {
	db *bolt.DB
}

// personState is one receiver's hourly-cap window and held notices.
type personState struct {
	Sent []time.Time `json:"sent"`
	Held []Held      `json:"held,omitempty"`
}

// batch is one atomic set of changes: written in one transaction, so an
// alert change and the notifications it causes persist together.
type batch struct {
	alerts map[string]Alert
	people map[string]personState
	audit  []AuditRecord
	notes  []Notification
	// lastTick, if set, is the time of the Tick that made the batch.
	lastTick time.Time
}

func newBatch() *batch {
	return &batch{alerts: map[string]Alert{}, people: map[string]personState{}}
}

func (b *batch) empty() bool {
	return len(b.alerts) == 0 && len(b.people) == 0 && len(b.audit) == 0 && len(b.notes) == 0 && b.lastTick.IsZero()
}

// merge moves later changes of o into b (o wins).
func (b *batch) merge(o *batch) {
	for k, v := range o.alerts {
		b.alerts[k] = v
	}
	for k, v := range o.people {
		b.people[k] = v
	}
	b.audit = append(b.audit, o.audit...)
	b.notes = append(b.notes, o.notes...)
	if o.lastTick.After(b.lastTick) {
		b.lastTick = o.lastTick
	}
}

func openStore(dir string) (*store, error) {
	if dir == "" {
		return nil, fmt.Errorf("alerts: store: data_dir is empty")
	}
	if err := os.MkdirAll(dir, 0o750); err != nil {
		return nil, fmt.Errorf("alerts: store: %w", err)
	}
	path := filepath.Join(dir, "alerts.db")
	db, err := bolt.Open(path, 0o600, &bolt.Options{Timeout: 2 * time.Second})
	if err != nil {
		return nil, fmt.Errorf("alerts: store %s: %w", path, err)
	}
	err = db.Update(func(tx *bolt.Tx) error {
		for _, b := range [][]byte{bucketAlerts, bucketAudit, bucketOutbox, bucketDeliveries, bucketPeople, bucketMeta} {
			if _, err := tx.CreateBucketIfNotExists(b); err != nil {
				return err
			}
		}
		return nil
	})
	if err != nil {
		db.Close()
		return nil, fmt.Errorf("alerts: store %s: %w", path, err)
	}
	return &store{db: db}, nil
}

func (s *store) close() error { return s.db.Close() }

func u64(n uint64) []byte {
	var b [8]byte
	binary.BigEndian.PutUint64(b[:], n)
	return b[:]
}

func outboxKey(channel string, id uint64) []byte {
	return append([]byte(channel+"\x00"), u64(id)...)
}

// urgentPrefix starts the outbox keys of pressing notifications: a
// channel's dispatcher takes those first, in order, before the rest (no
// channel name starts with "!").
const urgentPrefix = "!"

// urgentKey is the outbox key of a pressing notification.
func urgentKey(channel string, id uint64) []byte {
	return outboxKey(urgentPrefix+channel, id)
}

// keyOf is n's outbox key: pressing notifications (see pressing) go
// ahead of the rest of their channel.
func keyOf(n Notification) []byte {
	if n.Notice != NoticeSummary && pressing(n.Alert.Severity, n.Notice) {
		return urgentKey(n.Channel, n.ID)
	}
	return outboxKey(n.Channel, n.ID)
}

// commit writes b in one transaction, numbering its notifications.
func (s *store) commit(b *batch) error {
	return s.db.Update(func(tx *bolt.Tx) error {
		ab := tx.Bucket(bucketAlerts)
		for id, a := range b.alerts {
			v, err := json.Marshal(a)
			if err != nil {
				return fmt.Errorf("alert %s: %w", id, err)
			}
			if err := ab.Put([]byte(id), v); err != nil {
				return fmt.Errorf("alert %s: %w", id, err)
			}
		}
		pb := tx.Bucket(bucketPeople)
		for id, p := range b.people {
			v, err := json.Marshal(p)
			if err != nil {
				return err
			}
			if err := pb.Put([]byte(id), v); err != nil {
				return err
			}
		}
		aud := tx.Bucket(bucketAudit)
		for _, r := range b.audit {
			seq, _ := aud.NextSequence()
			v, _ := json.Marshal(r)
			if err := aud.Put(append([]byte(r.Alert+"\x00"), u64(seq)...), v); err != nil {
				return err
			}
		}
		if !b.lastTick.IsZero() {
			v, _ := b.lastTick.UTC().MarshalText()
			if err := tx.Bucket(bucketMeta).Put(keyLastTick, v); err != nil {
				return err
			}
		}
		ob := tx.Bucket(bucketOutbox)
		for i := range b.notes {
			seq, _ := ob.NextSequence()
			b.notes[i].ID = seq
			v, err := json.Marshal(b.notes[i])
			if err != nil {
				return err
			}
			if err := ob.Put(keyOf(b.notes[i]), v); err != nil {
				return err
			}
		}
		return nil
	})
}

// lastTick returns the time of the last persisted Tick (zero if none).
func (s *store) lastTick() (time.Time, error) {
	var t time.Time
	err := s.db.View(func(tx *bolt.Tx) error {
		if v := tx.Bucket(bucketMeta).Get(keyLastTick); v != nil {
			return t.UnmarshalText(v)
		}
		return nil
	})
	return t, err
}

// load returns every alert and person state stored.
func (s *store) load() ([]Alert, map[string]personState, error) {
	var alerts []Alert
	people := map[string]personState{}
	err := s.db.View(func(tx *bolt.Tx) error {
		err := tx.Bucket(bucketAlerts).ForEach(func(k, v []byte) error {
			var a Alert
			if err := json.Unmarshal(v, &a); err != nil {
				return fmt.Errorf("alert %s: %w", k, err)
			}
			alerts = append(alerts, a)
			return nil
		})
		if err != nil {
			return err
		}
		return tx.Bucket(bucketPeople).ForEach(func(k, v []byte) error {
			var p personState
			if err := json.Unmarshal(v, &p); err != nil {
				return fmt.Errorf("receiver %s: %w", k, err)
			}
			people[string(k)] = p
			return nil
		})
	})
	if err != nil {
		return nil, nil, fmt.Errorf("alerts: store: %w", err)
	}
	return alerts, people, nil
}

// alert reads one stored alert.
func (s *store) alert(id string) (Alert, bool, error) {
	var a Alert
	found := false
	err := s.db.View(func(tx *bolt.Tx) error {
		v := tx.Bucket(bucketAlerts).Get([]byte(id))
		if v == nil {
			return nil
		}
		found = true
		return json.Unmarshal(v, &a)
	})
	return a, found, err
}

// auditOf returns the audit records of alert id, oldest first.
func (s *store) auditOf(id string) ([]AuditRecord, error) {
	var out []AuditRecord
	prefix := []byte(id + "\x00")
	err := s.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bucketAudit).Cursor()
		for k, v := c.Seek(prefix); k != nil && bytes.HasPrefix(k, prefix); k, v = c.Next() {
			var r AuditRecord
			if err := json.Unmarshal(v, &r); err != nil {
				return err
			}
			out = append(out, r)
		}
		return nil
	})
	return out, err
}

// next returns the oldest pending pressing notification of channel, or
// else its oldest pending notification.
func (s *store) next(channel string) (Notification, bool, error) {
	var n Notification
	found := false
	err := s.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bucketOutbox).Cursor()
		for _, prefix := range [][]byte{[]byte(urgentPrefix + channel + "\x00"), []byte(channel + "\x00")} {
			k, v := c.Seek(prefix)
			if k != nil && bytes.HasPrefix(k, prefix) {
				found = true
				return json.Unmarshal(v, &n)
			}
		}
		return nil
	})
	if err != nil {
		return n, false, fmt.Errorf("alerts: outbox %s: %w", channel, err)
	}
	return n, found, nil
}

// done removes n from the outbox and appends its outcome to the delivery
// log, in one transaction.
func (s *store) done(n Notification, rec DeliveryRecord) error {
	return s.db.Update(func(tx *bolt.Tx) error {
		// Under either key: a store written before pressing
		// notifications went first holds them under the plain one.
		ob := tx.Bucket(bucketOutbox)
		if err := ob.Delete(outboxKey(n.Channel, n.ID)); err != nil {
			return err
		}
		if err := ob.Delete(urgentKey(n.Channel, n.ID)); err != nil {
			return err
		}
		db := tx.Bucket(bucketDeliveries)
		seq, _ := db.NextSequence()
		v, _ := json.Marshal(rec)
		if err := db.Put(u64(seq), v); err != nil {
			return err
		}
		// Keep the newest deliveryLogLimit records.
		if seq > deliveryLogLimit {
			return db.Delete(u64(seq - deliveryLogLimit))
		}
		return nil
	})
}

// pending counts the notifications in the outbox.
func (s *store) pending() (int, error) {
	n := 0
	err := s.db.View(func(tx *bolt.Tx) error {
		n = tx.Bucket(bucketOutbox).Stats().KeyN
		return nil
	})
	return n, err
}

// deliveries returns the delivery log, oldest first.
func (s *store) deliveries() ([]DeliveryRecord, error) {
	var out []DeliveryRecord
	err := s.db.View(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketDeliveries).ForEach(func(_, v []byte) error {
			var r DeliveryRecord
			if err := json.Unmarshal(v, &r); err != nil {
				return err
			}
			out = append(out, r)
			return nil
		})
	})
	return out, err
}
