package access

import (
	"bytes"
	"crypto/rand"
	"crypto/sha256"
	"encoding/base64"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"
	"unicode"
	"unicode/utf8"

	bolt "go.etcd.io/bbolt"

	"tagtally/capture"
)

// Errors of the access package; test with errors.Is.
var (
	// ErrNoCredentials: the request carried no token.
	ErrNoCredentials = errors.New("no access token")
	// ErrBadToken: the token is unknown or revoked.
	ErrBadToken = errors.New("access token not valid")
	// ErrBadCode: a claim or join code is unknown, used or expired.
	ErrBadCode = errors.New("code not valid")
	// ErrDenied: the token is valid but its role or study scope does not
	// allow the request.
	ErrDenied = errors.New("not allowed")
	// ErrTooManyAttempts: the attempt limit was reached; wait and retry.
	ErrTooManyAttempts = errors.New("too many attempts")
	// ErrInvalid: a request to this package is malformed (unknown role,
	// a device without a study, a label too long...).
	ErrInvalid = errors.New("invalid access request")
)

// Role is what a token may do.
type Role string

// Roles.
const (
	Coordinator Role = "coordinator"
	Recorder    Role = "recorder"
	Viewer      Role = "viewer"
	Peer        Role = "peer"
)

// Kind says how a token came to be and how it is sent.
type Kind string

// Kinds of token.
const (
	// KindSession is a coordinator's browser session, sent as a cookie;
	// its state-changing requests must also carry its CSRF token.
	KindSession Kind = "session"
	// KindCoordinator is a coordinator token for scripts (bearer).
	KindCoordinator Kind = "coordinator"
	// KindLocal is the token `tagtally serve` writes beside the data file
	// for the tagtally commands on the same machine (bearer).
	KindLocal Kind = "local"
	// KindDevice is a phone enrolled with a join code (bearer).
	KindDevice Kind = "device"
	// KindPeer is another tagtally server syncing with this one (bearer).
	KindPeer Kind = "peer"
)

// roleOf is the role each kind carries; devices carry the role of their
// join code.
var roleOf = map[Kind]Role{KindSession: Coordinator, KindCoordinator: Coordinator, KindLocal: Coordinator, KindPeer: Peer}

// MaxLabel is the longest label (a device name) in bytes.
const MaxLabel = 80

// Token is what the store keeps about one access token: never the token
// itself, only its hash (the key).
type Token struct {
	ID   string `json:"id"`
	Kind Kind   `json:"kind"`
	Role Role   `json:"role"`
	// Studies is the study scope; nil (all studies) only for coordinator
	// kinds. A device has exactly one, a peer one or more.
	Studies  []string   `json:"studies,omitempty"`
	Label    string     `json:"label"`
	Created  time.Time  `json:"created"`
	LastUsed time.Time  `json:"last_used"`
	Revoked  *time.Time `json:"revoked,omitempty"`
	// CSRF is a session's CSRF token (sessions only); it is readable only
	// with the session's cookie, which other sites cannot send.
	CSRF string `json:"-"`
	// CreatedBy is the label of the token that made this one.
	CreatedBy string `json:"created_by,omitempty"`
}

// storedToken is a Token with its CSRF token, as kept in the bucket.
type storedToken struct {
	Token
	CSRF string `json:"csrf,omitempty"`
}

// AllStudies reports whether the token reaches every study.
func (t *Token) AllStudies() bool { return t.Studies == nil }

// Allows reports whether the token's scope includes the study.
func (t *Token) Allows(study string) bool {
	return t.Studies == nil || slices.Contains(t.Studies, study)
}

// Buckets this package owns in the capture store's file:
//
//	access_tokens: SHA-256 of the token (32) -> storedToken JSON
//	access_codes:  SHA-256 of the normalised code (32) -> code JSON
//	access_audit:  sequence (8, big-endian) -> Entry JSON
var (
	bucketTokens = []byte("access_tokens")
	bucketCodes  = []byte("access_codes")
	bucketAudit  = []byte("access_audit")
)

// touchEvery is how stale a token's LastUsed may get before a request
// writes it again: writing it on every request would add a disk sync to
// every read.
const touchEvery = time.Minute

// SessionIdle ends a coordinator's browser session unused this long; the
// coordinator then opens a new link (tagtally access link).
const SessionIdle = 7 * 24 * time.Hour

// Service is access control over one capture store.
type Service struct {
	store   *capture.Store
	now     func() time.Time
	Attempt *Limiter // limits on claim and join attempts
}

// New makes the access service over an open store.
func New(store *capture.Store) *Service {
	return &Service{store: store, now: time.Now, Attempt: NewLimiter(DefaultLimits)}
}

// SetClock replaces the clock (tests of expiry).
func (s *Service) SetClock(now func() time.Time) { s.now = now }

func hashOf(secret string) []byte {
	h := sha256.Sum256([]byte(secret))
	return h[:]
}

func randomToken() string {
	b := make([]byte, 32)
	rand.Read(b) // never fails (crypto/rand)
	return base64.RawURLEncoding.EncodeToString(b)
}

func randomID() string {
	b := make([]byte, 8)
	rand.Read(b)
	return hex.EncodeToString(b)
}

// NewToken is what Issue needs to make a token.
type NewToken struct {
	Kind      Kind
	Role      Role // devices only; other kinds have a fixed role
	Studies   []string
	Label     string
	CreatedBy string
}

// validLabel refuses labels that are too long, not UTF-8 or hold control
// characters: labels are shown to the coordinator and written in logs.
func validLabel(l string) error {
	if len(l) > MaxLabel {
		return fmt.Errorf("%w: label is longer than %d bytes", ErrInvalid, MaxLabel)
	}
	return plainText("label", l)
}

// plainText refuses text that is not UTF-8 or holds control characters.
func plainText(what, s string) error {
	if !utf8.ValidString(s) {
		return fmt.Errorf("%w: %s is not valid UTF-8 text", ErrInvalid, what)
	}
	for _, r := range s {
		if unicode.IsControl(r) {
			return fmt.Errorf("%w: %s holds a control character", ErrInvalid, what)
		}
	}
	return nil
}

func (n *NewToken) check() error {
	if err := validLabel(n.Label); err != nil {
		return err
	}
	switch n.Kind {
	case KindSession, KindCoordinator, KindLocal:
		n.Role, n.Studies = Coordinator, nil
		return nil
	case KindPeer:
		n.Role = Peer
		if len(n.Studies) == 0 {
			return fmt.Errorf("%w: a peer token needs at least one study", ErrInvalid)
		}
	case KindDevice:
		if n.Role != Recorder && n.Role != Viewer {
			return fmt.Errorf("%w: a device is a recorder or a viewer, not %q", ErrInvalid, n.Role)
		}
		if len(n.Studies) != 1 {
			return fmt.Errorf("%w: a device is enrolled for exactly one study", ErrInvalid)
		}
	default:
		return fmt.Errorf("%w: unknown kind of token %q", ErrInvalid, n.Kind)
	}
	for _, st := range n.Studies {
		if strings.TrimSpace(st) == "" || len(st) > 200 {
			return fmt.Errorf("%w: study ID %q", ErrInvalid, st)
		}
	}
	return nil
}

// Issue makes a token and returns the secret (shown once, never stored)
// with what is stored about it. Studies must exist.
func (s *Service) Issue(n NewToken) (secret string, tok *Token, err error) {
	if err := n.check(); err != nil {
		return "", nil, err
	}
	err = s.store.Update(func(tx *capture.Tx) error {
		secret, tok, err = issue(tx, n, s.now())
		return err
	})
	if err != nil {
		return "", nil, fmt.Errorf("access: issue %s token: %w", n.Kind, err)
	}
	return secret, tok, nil
}

func issue(tx *capture.Tx, n NewToken, now time.Time) (string, *Token, error) {
	for _, st := range n.Studies {
		if _, err := tx.GetStudy(st); err != nil {
			return "", nil, err
		}
	}
	b, err := tx.Bucket(bucketTokens)
	if err != nil {
		return "", nil, err
	}
	secret := randomToken()
	st := storedToken{Token: Token{
		ID: randomID(), Kind: n.Kind, Role: n.Role, Studies: slices.Clone(n.Studies),
		Label: n.Label, Created: now.UTC(), LastUsed: now.UTC(), CreatedBy: n.CreatedBy,
	}}
	if n.Kind == KindSession {
		st.CSRF = randomToken()
	}
	if err := putJSON(b, hashOf(secret), st); err != nil {
		return "", nil, err
	}
	tok := st.Token
	tok.CSRF = st.CSRF
	return secret, &tok, nil
}

func putJSON(b *bolt.Bucket, key []byte, v any) error {
	val, err := json.Marshal(v)
	if err != nil {
		return err
	}
	return b.Put(key, val)
}

// Authenticate returns the token's record, read from the store now: a
// revoked or unknown token is ErrBadToken. It refreshes LastUsed at most
// once a minute.
func (s *Service) Authenticate(secret string) (*Token, error) {
	if secret == "" {
		return nil, ErrNoCredentials
	}
	// A well-formed token is 43 base64url characters; anything else is
	// refused without a lookup.
	if len(secret) != 43 {
		return nil, ErrBadToken
	}
	key := hashOf(secret)
	var st *storedToken
	err := s.store.View(func(tx *capture.Tx) error {
		var err error
		st, err = getToken(tx, key)
		return err
	})
	if err != nil {
		return nil, err
	}
	now := s.now().UTC()
	if st.Revoked != nil || (st.Kind == KindSession && now.Sub(st.LastUsed) > SessionIdle) {
		return nil, ErrBadToken
	}
	if now.Sub(st.LastUsed) > touchEvery {
		if err := s.touch(key, now); err != nil {
			return nil, err
		}
		st.LastUsed = now
	}
	tok := st.Token
	tok.CSRF = st.CSRF
	return &tok, nil
}

func getToken(tx *capture.Tx, key []byte) (*storedToken, error) {
	b, err := tx.Bucket(bucketTokens)
	if errors.Is(err, capture.ErrNotFound) {
		return nil, ErrBadToken
	}
	if err != nil {
		return nil, err
	}
	v := b.Get(key)
	if v == nil {
		return nil, ErrBadToken
	}
	st := new(storedToken)
	if err := json.Unmarshal(v, st); err != nil {
		return nil, fmt.Errorf("access: stored token unreadable: %w", err)
	}
	return st, nil
}

// touch writes LastUsed; the token may have been revoked since it was
// read, in which case it stays revoked (the request in flight finishes).
func (s *Service) touch(key []byte, now time.Time) error {
	return s.store.Update(func(tx *capture.Tx) error {
		st, err := getToken(tx, key)
		if err != nil {
			return err
		}
		st.LastUsed = now
		b, err := tx.Bucket(bucketTokens)
		if err != nil {
			return err
		}
		return putJSON(b, key, st)
	})
}

// Tokens lists every token (revoked ones too), newest first.
func (s *Service) Tokens() ([]Token, error) {
	out := []Token{}
	err := s.store.View(func(tx *capture.Tx) error {
		return eachToken(tx, func(_ []byte, st *storedToken) error {
			out = append(out, st.Token)
			return nil
		})
	})
	slices.SortFunc(out, func(a, b Token) int { return b.Created.Compare(a.Created) })
	return out, err
}

func eachToken(tx *capture.Tx, fn func(key []byte, st *storedToken) error) error {
	b, err := tx.Bucket(bucketTokens)
	if errors.Is(err, capture.ErrNotFound) {
		return nil
	}
	if err != nil {
		return err
	}
	return b.ForEach(func(k, v []byte) error {
		st := new(storedToken)
		if err := json.Unmarshal(v, st); err != nil {
			return fmt.Errorf("access: stored token unreadable: %w", err)
		}
		return fn(bytes.Clone(k), st)
	})
}

// Revoke revokes the token with this ID; the next request with it is
// refused. The records a device already synced stay. Revoking a revoked
// token changes nothing. ErrNotFound (capture's) when no token has the ID.
func (s *Service) Revoke(id string) (*Token, error) {
	var out *Token
	err := s.store.Update(func(tx *capture.Tx) error {
		found := false
		var key []byte
		var st *storedToken
		if err := eachToken(tx, func(k []byte, t *storedToken) error {
			if t.ID == id {
				found, key, st = true, k, t
			}
			return nil
		}); err != nil {
			return err
		}
		if !found {
			return fmt.Errorf("token %q: %w", id, capture.ErrNotFound)
		}
		if st.Revoked == nil {
			now := s.now().UTC()
			st.Revoked = &now
			b, err := tx.Bucket(bucketTokens)
			if err != nil {
				return err
			}
			if err := putJSON(b, key, st); err != nil {
				return err
			}
		}
		out = &st.Token
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("access: revoke: %w", err)
	}
	return out, nil
}

// RevokeKind revokes every unrevoked token of a kind (the previous run's
// local token when `tagtally serve` starts) and returns how many.
func (s *Service) RevokeKind(k Kind) (int, error) {
	n := 0
	err := s.store.Update(func(tx *capture.Tx) error {
		n = 0
		b, err := tx.Bucket(bucketTokens)
		if err != nil {
			return err
		}
		now := s.now().UTC()
		type hit struct {
			key []byte
			st  *storedToken
		}
		var hits []hit // bbolt forbids writes during ForEach
		if err := eachToken(tx, func(key []byte, st *storedToken) error {
			if st.Kind == k && st.Revoked == nil {
				hits = append(hits, hit{key, st})
			}
			return nil
		}); err != nil {
			return err
		}
		for _, h := range hits {
			h.st.Revoked = &now
			if err := putJSON(b, h.key, h.st); err != nil {
				return err
			}
		}
		n = len(hits)
		return nil
	})
	return n, err
}
