package study

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"strings"
	"testing"
	"time"
)

func TestIDs(t *testing.T) {
	seen := map[string]bool{}
	for range 1000 {
		id := NewID()
		if !ValidID(id) || len(id) != 26 || strings.ToLower(id) != id || seen[id] {
			t.Fatalf("bad or repeated id %q", id)
		}
		seen[id] = true
	}
	for _, bad := range []string{"", "abc", strings.Repeat("a", 25), strings.Repeat("a", 27),
		strings.ToUpper(NewID()), "0" + NewID()[1:], "../" + NewID()[3:]} {
		if ValidID(bad) {
			t.Errorf("ValidID(%q) = true", bad)
		}
	}
}

// The canonical encoding of a change, written out byte by byte from the
// description beside Change.MarshalBinary: each field an 8-byte length and
// its bytes, integers as 8 bytes.
func TestChangeEncoding(t *testing.T) {
	c := Change{Excluded: []Exclusion{{ID: "s3", Reason: "clot"}}, Options: []byte("{}")}
	want := "0000000000000010" + hex.EncodeToString([]byte("eivfit change v1")) +
		"0000000000000008" + "0000000000000001" + // one exclusion
		"0000000000000002" + hex.EncodeToString([]byte("s3")) +
		"0000000000000004" + hex.EncodeToString([]byte("clot")) +
		"0000000000000002" + hex.EncodeToString([]byte("{}"))
	got, _ := c.MarshalBinary()
	if hex.EncodeToString(got) != want {
		t.Fatalf("encoding\n got %x\nwant %s", got, want)
	}
	var back Change
	if err := back.UnmarshalBinary(got); err != nil || len(back.Excluded) != 1 || back.Excluded[0] != c.Excluded[0] ||
		!bytes.Equal(back.Options, c.Options) {
		t.Fatalf("round trip: %+v %v", back, err)
	}
	for n := range len(got) {
		if err := new(Change).UnmarshalBinary(got[:n]); !errors.Is(err, ErrInvalid) {
			t.Fatalf("truncated to %d bytes: %v, want ErrInvalid", n, err)
		}
	}
	if err := new(Change).UnmarshalBinary(append(got, 0)); !errors.Is(err, ErrInvalid) {
		t.Fatalf("trailing byte: %v", err)
	}
}

// Every field a hash covers changes it; fields that look alike in a naive
// concatenation ("ab"+"c" and "a"+"bc") do not collide.
func TestHashesCoverEveryField(t *testing.T) {
	base := func() *Study {
		return &Study{ID: testID(1), Kind: KindFit, Label: "ab", Tags: map[string]string{"k": "v"},
			Created: time.Date(2026, 1, 2, 3, 4, 5, 6000, time.UTC), Who: "c", Input: []byte("x,y\n1,2\n"),
			ContentType: "text/csv", Query: "q", Options: []byte("{}"), Seed: 7, Version: "v1", VCSRevision: "r", Result: []byte("res")}
	}
	ref := base()
	ref.InputSHA256 = sha256.Sum256(ref.Input)
	h0 := StudyHash(ref)
	mods := map[string]func(s *Study){
		"id": func(s *Study) { s.ID = testID(2) }, "kind": func(s *Study) { s.Kind = KindCalibration },
		"label": func(s *Study) { s.Label = "a"; s.Who = "bc" }, "tag value": func(s *Study) { s.Tags["k"] = "w" },
		"tag added": func(s *Study) { s.Tags["l"] = "" }, "created": func(s *Study) { s.Created = s.Created.Add(time.Microsecond) },
		"content type": func(s *Study) { s.ContentType = "text/plain" }, "query": func(s *Study) { s.Query = "" },
		"input": func(s *Study) { s.Input = []byte("x,y\n1,3\n") }, "options": func(s *Study) { s.Options = nil },
		"seed": func(s *Study) { s.Seed = 8 }, "version": func(s *Study) { s.Version = "v2" },
		"vcs": func(s *Study) { s.VCSRevision = "" }, "result": func(s *Study) { s.Result = []byte("rez") },
	}
	for name, mod := range mods {
		s := base()
		mod(s)
		s.InputSHA256 = sha256.Sum256(s.Input)
		if StudyHash(s) == h0 {
			t.Errorf("StudyHash ignores %s", name)
		}
	}
	r0 := Revision{Number: 1, BasedOn: 0, Reason: "why", Who: "a", When: ref.Created, Result: []byte("x"),
		Change: Change{Excluded: []Exclusion{{ID: "s1", Reason: "r"}}}, PrevHash: h0}
	hr := RevisionHash(ref.ID, &r0)
	rmods := map[string]func(r *Revision){
		"prev": func(r *Revision) { r.PrevHash[0] ^= 1 }, "number": func(r *Revision) { r.Number = 2 },
		"based_on": func(r *Revision) { r.BasedOn = 1 }, "reason": func(r *Revision) { r.Reason = "wh"; r.Who = "ya" },
		"when":      func(r *Revision) { r.When = r.When.Add(time.Microsecond) },
		"exclusion": func(r *Revision) { r.Change.Excluded = []Exclusion{{ID: "s", Reason: "1r"}} },
		"options":   func(r *Revision) { r.Change.Options = []byte("{}") }, "result": func(r *Revision) { r.Result = nil },
	}
	for name, mod := range rmods {
		r := r0
		r.Change.Excluded = append([]Exclusion(nil), r0.Change.Excluded...)
		mod(&r)
		if RevisionHash(ref.ID, &r) == hr {
			t.Errorf("RevisionHash ignores %s", name)
		}
	}
	if RevisionHash(testID(3), &r0) == hr {
		t.Error("RevisionHash ignores the study id")
	}
}

// testID is a fixed id for tests.
func testID(b byte) string { return idEncoding.EncodeToString(bytes.Repeat([]byte{b}, 16)) }
