package access

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"tagtally/capture"
)

// Entry is one audit log entry: a state-changing request and its answer.
type Entry struct {
	Seq  uint64    `json:"seq"`
	Time time.Time `json:"time"`
	// Who is the token's label (device name, "coordinator link", ...);
	// TokenID and Role identify the token; all empty for a request
	// without a valid token (a refused join attempt, say).
	Who     string `json:"who"`
	TokenID string `json:"token_id,omitempty"`
	Role    Role   `json:"role,omitempty"`
	Method  string `json:"method"`
	// Route is the route's pattern (/api/v1/studies/:study/captures/:id),
	// Path what was asked for.
	Route  string `json:"route"`
	Path   string `json:"path"`
	Study  string `json:"study,omitempty"`
	Record string `json:"record,omitempty"`
	Status int    `json:"status"`
	// Client is the client's network address.
	Client string `json:"client,omitempty"`
}

// maxPathLen bounds what an entry keeps of a request path.
const maxPathLen = 300

// Record appends an entry, in its own transaction. Not the store's Batch:
// with one writer at a time, Batch waits out bbolt's batch delay on every
// request (measured: a capture write took 17 times as long).
func (s *Service) Record(e Entry) error {
	if e.Time.IsZero() {
		e.Time = s.now().UTC()
	}
	for _, f := range []*string{&e.Path, &e.Route, &e.Study, &e.Record, &e.Who} {
		if len(*f) > maxPathLen {
			*f = (*f)[:maxPathLen]
		}
	}
	err := s.store.Update(func(tx *capture.Tx) error {
		b, err := tx.Bucket(bucketAudit)
		if err != nil {
			return err
		}
		seq, err := b.NextSequence()
		if err != nil {
			return err
		}
		x := e
		x.Seq = seq
		return putJSON(b, binary.BigEndian.AppendUint64(nil, seq), x)
	})
	if err != nil {
		return fmt.Errorf("access: audit: %w", err)
	}
	return nil
}

// MaxAuditPage is the most entries Audit returns at once.
const MaxAuditPage = 1000

// Audit returns up to limit entries, newest first, older than before
// (0: from the newest).
func (s *Service) Audit(limit int, before uint64) ([]Entry, error) {
	if limit <= 0 || limit > MaxAuditPage {
		limit = MaxAuditPage
	}
	out := []Entry{}
	err := s.store.View(func(tx *capture.Tx) error {
		b, err := tx.Bucket(bucketAudit)
		if errors.Is(err, capture.ErrNotFound) {
			return nil
		}
		if err != nil {
			return err
		}
		cur := b.Cursor()
		k, v := cur.Last()
		if before > 0 {
			k, v = cur.Seek(binary.BigEndian.AppendUint64(nil, before))
			if k == nil {
				k, v = cur.Last()
			} else {
				k, v = cur.Prev()
			}
		}
		for ; k != nil && len(out) < limit; k, v = cur.Prev() {
			var e Entry
			if err := json.Unmarshal(v, &e); err != nil {
				return fmt.Errorf("audit entry %x unreadable: %w", k, err)
			}
			if before > 0 && e.Seq >= before {
				continue
			}
			out = append(out, e)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("access: audit: %w", err)
	}
	return out, nil
}
