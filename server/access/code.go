package access

import (
	"crypto/rand"
	"fmt"
	"strings"
	"time"

	"encoding/json"

	"tagtally/capture"
)

// Lifetimes of the one-time codes.
const (
	// ClaimTTL: the coordinator link printed at start works this long.
	ClaimTTL = 12 * time.Hour
	// JoinTTL: a join code works this long; a crew enrols phones at camp
	// with the coordinator beside them.
	JoinTTL = 15 * time.Minute
)

// codeKind tells the two kinds of code apart in the bucket.
type codeKind string

const (
	codeClaim codeKind = "claim"
	codeJoin  codeKind = "join"
)

// storedCode is a code's record, keyed by the hash of the normalised code.
type storedCode struct {
	Kind      codeKind  `json:"kind"`
	Study     string    `json:"study,omitempty"`
	Role      Role      `json:"role,omitempty"`
	Created   time.Time `json:"created"`
	Expires   time.Time `json:"expires"`
	CreatedBy string    `json:"created_by,omitempty"`
}

// JoinCode is a join code as handed to the coordinator (the code itself
// is shown once).
type JoinCode struct {
	Code    string    `json:"code"`
	Study   string    `json:"study"`
	Role    Role      `json:"role"`
	Expires time.Time `json:"expires"`
}

// joinAlphabet is Crockford's base 32: no I, L, O or U, so a code read
// aloud or copied by hand is not mistyped as easily.
const joinAlphabet = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"

// joinLen is the number of characters of a join code: 60 bits. With the
// attempt limits (DefaultLimits: 60 a minute in all) a code lives through
// at most 900 guesses in its 15 minutes, so the chance that guessing finds
// it is below 900 / 2^60, about 2^-50.
const joinLen = 12

func newJoinCode() string {
	b := make([]byte, joinLen)
	rand.Read(b)
	var sb strings.Builder
	for i, x := range b {
		if i > 0 && i%4 == 0 {
			sb.WriteByte('-')
		}
		sb.WriteByte(joinAlphabet[x&31])
	}
	return sb.String()
}

// NormaliseJoinCode turns what a person typed into the stored form:
// upper case, without spaces or hyphens, with O read as 0 and I or L as 1.
// It returns "" for anything that cannot be a join code.
func NormaliseJoinCode(s string) string {
	if len(s) > 64 {
		return ""
	}
	var sb strings.Builder
	for _, r := range strings.ToUpper(s) {
		switch {
		case r == ' ' || r == '-':
			continue
		case r == 'O':
			r = '0'
		case r == 'I' || r == 'L':
			r = '1'
		}
		if r > 127 || !strings.ContainsRune(joinAlphabet, r) {
			return ""
		}
		sb.WriteRune(r)
	}
	if sb.Len() != joinLen {
		return ""
	}
	return sb.String()
}

// NewClaim makes the one-time coordinator claim code that `tagtally serve`
// prints in its link, and deletes every older claim code: only the newest
// link works.
func (s *Service) NewClaim() (string, error) {
	code := randomToken()
	now := s.now().UTC()
	err := s.store.Update(func(tx *capture.Tx) error {
		b, err := tx.Bucket(bucketCodes)
		if err != nil {
			return err
		}
		var old [][]byte
		if err := b.ForEach(func(k, v []byte) error {
			var c storedCode
			if json.Unmarshal(v, &c) != nil || c.Kind == codeClaim || now.After(c.Expires) {
				old = append(old, append([]byte(nil), k...))
			}
			return nil
		}); err != nil {
			return err
		}
		for _, k := range old { // also drops expired join codes
			if err := b.Delete(k); err != nil {
				return err
			}
		}
		return putJSON(b, hashOf(code), storedCode{Kind: codeClaim, Created: now, Expires: now.Add(ClaimTTL)})
	})
	if err != nil {
		return "", fmt.Errorf("access: new claim code: %w", err)
	}
	return code, nil
}

// NewJoinCode makes a join code for a study and role (recorder or viewer).
func (s *Service) NewJoinCode(study string, role Role, createdBy string) (*JoinCode, error) {
	if role != Recorder && role != Viewer {
		return nil, fmt.Errorf("access: join code: %w: the role is recorder or viewer, not %q", ErrInvalid, role)
	}
	code := newJoinCode()
	now := s.now().UTC()
	jc := &JoinCode{Code: code, Study: study, Role: role, Expires: now.Add(JoinTTL)}
	err := s.store.Update(func(tx *capture.Tx) error {
		if _, err := tx.GetStudy(study); err != nil {
			return err
		}
		b, err := tx.Bucket(bucketCodes)
		if err != nil {
			return err
		}
		return putJSON(b, hashOf(NormaliseJoinCode(code)), storedCode{Kind: codeJoin, Study: study, Role: role, Created: now, Expires: jc.Expires, CreatedBy: createdBy})
	})
	if err != nil {
		return nil, fmt.Errorf("access: join code: %w", err)
	}
	return jc, nil
}

// Claim exchanges the coordinator claim code for a coordinator session.
// The code is used up in the same transaction that makes the session.
func (s *Service) Claim(code, label string) (secret string, tok *Token, err error) {
	if len(code) != 43 {
		return "", nil, fmt.Errorf("access: claim: %w", ErrBadCode)
	}
	return s.redeem(hashOf(code), codeClaim, func(c storedCode) NewToken {
		return NewToken{Kind: KindSession, Label: label, CreatedBy: "coordinator link"}
	}, label)
}

// Join exchanges a join code for a device token bound to the code's
// study and role, labelled with the device name given.
func (s *Service) Join(code, label string) (secret string, tok *Token, err error) {
	norm := NormaliseJoinCode(code)
	if norm == "" {
		return "", nil, fmt.Errorf("access: join: %w", ErrBadCode)
	}
	return s.redeem(hashOf(norm), codeJoin, func(c storedCode) NewToken {
		return NewToken{Kind: KindDevice, Role: c.Role, Studies: []string{c.Study}, Label: label, CreatedBy: c.CreatedBy}
	}, label)
}

func (s *Service) redeem(key []byte, kind codeKind, mk func(storedCode) NewToken, label string) (secret string, tok *Token, err error) {
	if err := validLabel(label); err != nil {
		return "", nil, err
	}
	now := s.now().UTC()
	expired := false
	err = s.store.Update(func(tx *capture.Tx) error {
		b, err := tx.Bucket(bucketCodes)
		if err != nil {
			return err
		}
		v := b.Get(key)
		if v == nil {
			return ErrBadCode
		}
		var c storedCode
		if err := json.Unmarshal(v, &c); err != nil {
			return fmt.Errorf("stored code unreadable: %w", err)
		}
		if c.Kind != kind {
			return ErrBadCode
		}
		// A used code is deleted; an expired one is deleted too, and the
		// transaction commits that deletion before the code is refused.
		if err := b.Delete(key); err != nil {
			return err
		}
		if now.After(c.Expires) {
			expired = true
			return nil
		}
		n := mk(c)
		if err := n.check(); err != nil {
			return err
		}
		secret, tok, err = issue(tx, n, now)
		return err
	})
	if err == nil && expired {
		return "", nil, fmt.Errorf("access: %s: %w: it expired", kind, ErrBadCode)
	}
	if err != nil {
		return "", nil, fmt.Errorf("access: %s: %w", kind, err)
	}
	return secret, tok, nil
}
