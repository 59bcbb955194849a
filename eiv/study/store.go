package study

import (
	"bytes"
	"context"
	"crypto/rand"
	"crypto/sha256"
	"encoding/base32"
	"encoding/binary"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"
)

// Errors a Store returns, wrapped with detail; test them with errors.Is.
var (
	// ErrNotFound: no study (or revision) with that id (or number).
	ErrNotFound = errors.New("study: not found")
	// ErrConflict: AddRevision's basedOn is not the latest revision (another
	// revision came first), or a record with that key exists already.
	ErrConflict = errors.New("study: conflict")
	// ErrUnavailable: the database cannot be reached, is closed, or is busy
	// past its timeout. The call may succeed when retried later.
	ErrUnavailable = errors.New("study: store unavailable")
	// ErrInvalid: a record or filter the store refuses (missing reason,
	// unknown kind, input hash that does not match the input, bad cursor).
	ErrInvalid = errors.New("study: invalid")
)

// Store keeps studies, their revisions and signatures. Nothing is ever
// updated or deleted: a study is written once, revisions are appended, and
// signatures are appended to a revision. Implementations are safe for
// concurrent use, also by several processes sharing one database.
type Store interface {
	// Save writes s and its revision 0 durably: when Save returns nil the
	// record survives a crash. It fills the fields it owns when they are
	// zero (ID, Created, InputSHA256) and truncates Created to the
	// microsecond; a set InputSHA256 must match Input.
	Save(ctx context.Context, s *Study) error
	// Get reads one study.
	Get(ctx context.Context, id string) (*Study, error)
	// List returns one page of summaries, newest first, and the cursor of
	// the next page ("" on the last page).
	List(ctx context.Context, f Filter) ([]Summary, string, error)
	// AddRevision appends r as revision basedOn+1. basedOn must be the
	// latest revision: of concurrent calls with one basedOn exactly one
	// succeeds and the others get ErrConflict. The store sets Number,
	// BasedOn, When (server time, UTC, microseconds), PrevHash and Hash, and
	// returns the stored revision.
	AddRevision(ctx context.Context, id string, basedOn int, r *Revision) (*Revision, error)
	// History returns every revision from 0, each with its signatures.
	History(ctx context.Context, id string) ([]Revision, error)
	// Sign appends a signature to revision rev. The store sets When (server
	// time) and RevisionHash; a RevisionHash set by the caller must match
	// the revision's (ErrConflict otherwise). One signer signs one revision
	// with one meaning once (ErrConflict on a repeat).
	Sign(ctx context.Context, id string, rev int, sig *Signature) error
	// Ping checks the database answers.
	Ping(ctx context.Context) error
	// Close releases the database; later calls give ErrUnavailable.
	Close() error
}

// StudyKind is the computation a study records.
type StudyKind string

// The kinds of study, named as the routes that make them.
const (
	KindFit              StudyKind = "fit"
	KindMethodComparison StudyKind = "method-comparison"
	KindCalibration      StudyKind = "calibration"
)

// Valid reports whether k is one of the kinds above.
func (k StudyKind) Valid() bool {
	return k == KindFit || k == KindMethodComparison || k == KindCalibration
}

// Study is one saved computation, exactly as it was asked and answered.
type Study struct {
	ID          string            // opaque, from NewID; set by Save when empty
	Kind        StudyKind         // the computation
	Label       string            // free text from the user; may be empty
	Tags        map[string]string // free key/value pairs (analyte, instrument, site, …); keys non-empty, without ':'
	Created     time.Time         // UTC, microseconds; set by Save when zero
	Who         string            // the API key's name ("" without keys)
	Input       []byte            // the request body exactly as received
	ContentType string            // the request's Content-Type
	Query       string            // the request's raw query string
	InputSHA256 [sha256.Size]byte // SHA-256 of Input; set by Save when zero
	Options     []byte            // the parsed options in the api layer's canonical encoding
	Seed        uint64            // the seed actually used
	Version     string            // module version of the software that computed Result
	VCSRevision string            // its VCS revision ("" when not stamped)
	Result      []byte            // the answer as returned
}

// Summary is a study as listed, without its bodies.
type Summary struct {
	ID          string
	Kind        StudyKind
	Label       string
	Tags        map[string]string
	Created     time.Time
	Who         string
	InputSHA256 [sha256.Size]byte
	Latest      int // number of the latest revision (0: never revised)
}

// Exclusion removes one point (by its id in the input) from a revision's
// computation, with the analyst's reason.
type Exclusion struct {
	ID     string
	Reason string
}

// Change is what a revision changes relative to the stored input and
// options: the points it leaves out and the options it sets (in the api
// layer's canonical encoding; empty for none).
type Change struct {
	Excluded []Exclusion
	Options  []byte
}

// Revision is one entry in a study's audit trail. Revision 0 is the study
// as saved (BasedOn −1, no reason, no change); every later one is
// recomputed from the stored input with its Change.
type Revision struct {
	Number   int
	BasedOn  int
	Reason   string
	Who      string
	When     time.Time // UTC, microseconds
	Change   Change
	Result   []byte
	PrevHash [sha256.Size]byte // Hash of revision Number−1 (zero for revision 0)
	Hash     [sha256.Size]byte // see RevisionHash and StudyHash

	// Signatures on this revision, oldest first; filled by History and
	// never part of Hash.
	Signatures []Signature
}

// Meaning is what a signature attests.
type Meaning string

// The meanings of a signature.
const (
	MeaningReviewed Meaning = "reviewed"
	MeaningApproved Meaning = "approved"
)

// Valid reports whether m is reviewed or approved.
func (m Meaning) Valid() bool { return m == MeaningReviewed || m == MeaningApproved }

// Signature is a reviewer's or approver's mark on one revision.
type Signature struct {
	Revision     int
	Meaning      Meaning
	Signer       string    // the API key's name
	When         time.Time // server time, UTC, microseconds; set by the store
	Comment      string
	RevisionHash [sha256.Size]byte // the Hash of the revision signed
}

// Filter selects a page of List. Zero fields do not filter.
type Filter struct {
	Kind  StudyKind
	Label string            // exact match
	Tags  map[string]string // every pair must match
	From  time.Time         // Created ≥ From
	To    time.Time         // Created < To
	Limit int               // page size; 0 means DefaultLimit, at most MaxLimit
	// Cursor continues a listing from the page that returned it; it is
	// opaque, and valid with the same filter only.
	Cursor string
}

// Page sizes of List.
const (
	DefaultLimit = 50
	MaxLimit     = 500
)

// NewID returns a fresh study id: 128 random bits from crypto/rand in
// lower-case base32 without padding (26 characters).
func NewID() string {
	var b [16]byte
	rand.Read(b[:]) // never fails (crypto/rand panics rather than return short)
	return idEncoding.EncodeToString(b[:])
}

var idEncoding = base32.NewEncoding("abcdefghijklmnopqrstuvwxyz234567").WithPadding(base32.NoPadding)

// ValidID reports whether id has the form NewID gives.
func ValidID(id string) bool {
	if len(id) != 26 {
		return false
	}
	b, err := idEncoding.DecodeString(id)
	return err == nil && len(b) == 16 && idEncoding.EncodeToString(b) == id
}

// Prepare checks s and fills the fields Save owns (ID, Created,
// InputSHA256); stores call it before writing.
func (s *Study) Prepare(now time.Time) error {
	if s.ID == "" {
		s.ID = NewID()
	} else if !ValidID(s.ID) {
		return fmt.Errorf("%w: id %q is not a study id", ErrInvalid, s.ID)
	}
	if !s.Kind.Valid() {
		return fmt.Errorf("%w: kind %q", ErrInvalid, s.Kind)
	}
	for k := range s.Tags {
		if k == "" || strings.Contains(k, ":") {
			return fmt.Errorf("%w: tag key %q (non-empty, without ':')", ErrInvalid, k)
		}
	}
	if s.Created.IsZero() {
		s.Created = now
	}
	s.Created = Timestamp(s.Created)
	sum := sha256.Sum256(s.Input)
	if s.InputSHA256 == ([sha256.Size]byte{}) {
		s.InputSHA256 = sum
	} else if s.InputSHA256 != sum {
		return fmt.Errorf("%w: input SHA-256 does not match the input", ErrInvalid)
	}
	return nil
}

// Timestamp is t as stores keep it: UTC, truncated to the microsecond
// (PostgreSQL's resolution).
func Timestamp(t time.Time) time.Time { return t.UTC().Truncate(time.Microsecond) }

// Check validates a revision before AddRevision writes it.
func (r *Revision) Check(basedOn int) error {
	if basedOn < 0 {
		return fmt.Errorf("%w: based_on %d", ErrInvalid, basedOn)
	}
	if strings.TrimSpace(r.Reason) == "" {
		return fmt.Errorf("%w: a revision needs a reason", ErrInvalid)
	}
	for i, e := range r.Change.Excluded {
		if e.ID == "" || strings.TrimSpace(e.Reason) == "" {
			return fmt.Errorf("%w: exclusion %d needs a point id and a reason", ErrInvalid, i+1)
		}
	}
	return nil
}

// Check validates a signature before Sign writes it.
func (sig *Signature) Check() error {
	if !sig.Meaning.Valid() {
		return fmt.Errorf("%w: meaning %q (reviewed or approved)", ErrInvalid, sig.Meaning)
	}
	if sig.Signer == "" {
		return fmt.Errorf("%w: a signature needs a signer", ErrInvalid)
	}
	return nil
}

// The canonical encoding behind the hashes, and of Change in storage.
//
// A record is a sequence of fields, each written as its length in bytes
// (8-byte big-endian unsigned) followed by its bytes:
//
//	string, []byte   the bytes as they are (UTF-8 for strings)
//	integer          8-byte big-endian two's complement
//	time             integer: microseconds since 1970-01-01 UTC
//	hash             its 32 bytes
//	map              integer count, then key and value of each pair in byte order of the keys
//	list             integer count, then each element's fields
//
// The first field names the record and its version ("eivfit study v1",
// "eivfit revision v1", "eivfit change v1"), so that no two kinds of
// record share an encoding.

type enc struct{ b []byte }

func (e *enc) bytes(p []byte) {
	e.b = binary.BigEndian.AppendUint64(e.b, uint64(len(p)))
	e.b = append(e.b, p...)
}
func (e *enc) str(s string) { e.bytes([]byte(s)) }
func (e *enc) int(v int64) {
	e.b = binary.BigEndian.AppendUint64(e.b, 8)
	e.b = binary.BigEndian.AppendUint64(e.b, uint64(v))
}
func (e *enc) time(t time.Time) { e.int(Timestamp(t).UnixMicro()) }

type dec struct {
	b   []byte
	err error
}

func (d *dec) bytes() []byte {
	if d.err != nil {
		return nil
	}
	if len(d.b) < 8 || uint64(len(d.b)-8) < binary.BigEndian.Uint64(d.b) {
		d.err = errors.New("study: truncated canonical encoding")
		return nil
	}
	n := binary.BigEndian.Uint64(d.b)
	p := d.b[8 : 8+n]
	d.b = d.b[8+n:]
	return p
}
func (d *dec) int() int64 {
	p := d.bytes()
	if d.err == nil && len(p) != 8 {
		d.err = errors.New("study: bad integer in canonical encoding")
	}
	if d.err != nil {
		return 0
	}
	return int64(binary.BigEndian.Uint64(p))
}

const (
	tagStudy    = "eivfit study v1"
	tagRevision = "eivfit revision v1"
	tagChange   = "eivfit change v1"
)

// MarshalBinary writes c in the canonical encoding.
func (c Change) MarshalBinary() ([]byte, error) {
	var e enc
	e.str(tagChange)
	e.int(int64(len(c.Excluded)))
	for _, x := range c.Excluded {
		e.str(x.ID)
		e.str(x.Reason)
	}
	e.bytes(c.Options)
	return e.b, nil
}

// UnmarshalBinary reads what MarshalBinary wrote.
func (c *Change) UnmarshalBinary(b []byte) error {
	d := dec{b: b}
	if string(d.bytes()) != tagChange && d.err == nil {
		d.err = errors.New("study: not a change record")
	}
	n := d.int()
	if d.err == nil && (n < 0 || n > int64(len(b))) {
		d.err = errors.New("study: bad exclusion count")
	}
	var out Change
	for i := int64(0); i < n && d.err == nil; i++ {
		id, reason := d.bytes(), d.bytes()
		out.Excluded = append(out.Excluded, Exclusion{ID: string(id), Reason: string(reason)})
	}
	out.Options = bytes.Clone(d.bytes())
	if d.err == nil && len(d.b) != 0 {
		d.err = errors.New("study: trailing bytes after a change record")
	}
	if d.err != nil {
		return fmt.Errorf("%w: %v", ErrInvalid, d.err)
	}
	*c = out
	return nil
}

// StudyHash is the hash of revision 0: SHA-256 of the canonical encoding of
//
//	"eivfit study v1", 32 zero bytes (no previous revision), ID, Kind,
//	Label, Tags, Created, Who, ContentType, Query, InputSHA256, Options,
//	Seed, Version, VCSRevision, Result
//
// The input enters through its SHA-256, which Save checks against it.
func StudyHash(s *Study) [sha256.Size]byte {
	var e enc
	e.str(tagStudy)
	e.bytes(make([]byte, sha256.Size))
	e.str(s.ID)
	e.str(string(s.Kind))
	e.str(s.Label)
	keys := make([]string, 0, len(s.Tags))
	for k := range s.Tags {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	e.int(int64(len(keys)))
	for _, k := range keys {
		e.str(k)
		e.str(s.Tags[k])
	}
	e.time(s.Created)
	e.str(s.Who)
	e.str(s.ContentType)
	e.str(s.Query)
	e.bytes(s.InputSHA256[:])
	e.bytes(s.Options)
	e.int(int64(s.Seed))
	e.str(s.Version)
	e.str(s.VCSRevision)
	e.bytes(s.Result)
	return sha256.Sum256(e.b)
}

// RevisionHash is the hash of revision r ≥ 1 of study id: SHA-256 of the
// canonical encoding of
//
//	"eivfit revision v1", PrevHash, id, Number, BasedOn, Reason, Who, When,
//	Change (its canonical encoding, as one field), Result
//
// Each revision's hash covers its predecessor's, so changing any revision
// changes the hash of every later one.
func RevisionHash(id string, r *Revision) [sha256.Size]byte {
	var e enc
	e.str(tagRevision)
	e.bytes(r.PrevHash[:])
	e.str(id)
	e.int(int64(r.Number))
	e.int(int64(r.BasedOn))
	e.str(r.Reason)
	e.str(r.Who)
	e.time(r.When)
	ch, _ := r.Change.MarshalBinary()
	e.bytes(ch)
	e.bytes(r.Result)
	return sha256.Sum256(e.b)
}

// Original is revision 0 of s as Save stores it.
func Original(s *Study) Revision {
	return Revision{
		Number: 0, BasedOn: -1, Who: s.Who, When: s.Created,
		Result: s.Result, Hash: StudyHash(s),
	}
}

// VerifyChain checks a study's history as History returns it: the input
// matches its SHA-256, revision 0 is the study, the revisions are numbered
// 0, 1, … each based on its predecessor, every hash is recomputed and
// chained to the previous one, and every signature covers its revision's
// hash. It names the first revision that fails.
func VerifyChain(s *Study, revs []Revision) error {
	if sha256.Sum256(s.Input) != s.InputSHA256 {
		return fmt.Errorf("study %s: input does not match its SHA-256", s.ID)
	}
	var prev [sha256.Size]byte
	for i := range revs {
		r := &revs[i]
		var want [sha256.Size]byte
		switch {
		case r.Number != i:
			return fmt.Errorf("study %s: revision %d found where %d belongs", s.ID, r.Number, i)
		case i == 0:
			if r.BasedOn != -1 || !bytes.Equal(r.Result, s.Result) {
				return fmt.Errorf("study %s: revision 0 is not the study as saved", s.ID)
			}
			want = StudyHash(s)
		default:
			if r.BasedOn != i-1 {
				return fmt.Errorf("study %s: revision %d based on %d", s.ID, i, r.BasedOn)
			}
			want = RevisionHash(s.ID, r)
		}
		if r.PrevHash != prev {
			return fmt.Errorf("study %s: revision %d does not chain to revision %d", s.ID, i, i-1)
		}
		if r.Hash != want {
			return fmt.Errorf("study %s: revision %d: hash does not match its content", s.ID, i)
		}
		for _, sig := range r.Signatures {
			if sig.Revision != i || sig.RevisionHash != r.Hash {
				return fmt.Errorf("study %s: revision %d: a signature by %q covers another hash", s.ID, i, sig.Signer)
			}
		}
		prev = r.Hash
	}
	if len(revs) == 0 {
		return fmt.Errorf("study %s: no revision 0", s.ID)
	}
	return nil
}
