package store

import (
	"bytes"
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"eivfit/eiv/study"
)

func TestSaveGetRoundTrip(t *testing.T) {
	created := time.Date(2026, 3, 4, 5, 6, 7, 891_234_567, time.FixedZone("CET", 3600))
	cases := []struct {
		name string
		s    *study.Study
	}{
		{"csv sample", sample(1, 0)},
		{"empty label, no tags, nil options", &study.Study{Kind: study.KindFit, Input: []byte(`{"x":[1,2],"y":[3,4]}`),
			ContentType: "application/json", Result: []byte(`{}`)}},
		{"binary input with NUL and invalid UTF-8", &study.Study{Kind: study.KindCalibration,
			Input: []byte{0, 1, 2, 0xff, 0xfe, 0, 'a', 0x80}, ContentType: "application/octet-stream",
			Options: []byte{0}, Result: []byte{0xff, 0}}},
		{"unicode text, largest seed, caller's time in another zone", &study.Study{Kind: study.KindMethodComparison,
			Label: "Glukose – Gerät 2 ✓", Tags: map[string]string{"analyte": "glucose", "note": "µmol/L; a=b&c"},
			Who: "reviewer-ä", Input: []byte("x,y\n1,2\n"), Query: "save=true&label=%E2%9C%93", Seed: math.MaxUint64,
			Created: created, Version: "(devel)", Result: []byte(`{"ok":true}`)}},
		{"one MiB of random input", &study.Study{Kind: study.KindFit, Input: randomBytes(1 << 20), Result: randomBytes(4096)}},
	}
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		for _, c := range cases {
			t.Run(c.name, func(t *testing.T) {
				in := *c.s
				in.Input = bytes.Clone(c.s.Input) // the store must not need the caller's slices afterwards
				want := in
				if err := s.Save(ctx, &in); err != nil {
					t.Fatal(err)
				}
				if !study.ValidID(in.ID) || in.InputSHA256 != sha256.Sum256(want.Input) || in.Created.IsZero() {
					t.Fatalf("Save did not fill id/hash/created: %q %x %v", in.ID, in.InputSHA256, in.Created)
				}
				if !c.s.Created.IsZero() && !in.Created.Equal(c.s.Created.Truncate(time.Microsecond)) {
					t.Errorf("created %v, want the caller's %v to the microsecond", in.Created, c.s.Created)
				}
				got, err := s.Get(ctx, in.ID)
				if err != nil {
					t.Fatal(err)
				}
				if err := sameStudy(got, &in); err != nil {
					t.Error(err)
				}
				if err := sameContent(got, &want); err != nil {
					t.Error(err)
				}
			})
		}
	})
}

func TestSaveRefuses(t *testing.T) {
	cases := []struct {
		name   string
		modify func(s *study.Study)
		want   error
	}{
		{"unknown kind", func(s *study.Study) { s.Kind = "regression" }, study.ErrInvalid},
		{"input hash that does not match", func(s *study.Study) { s.InputSHA256[0] = 1 }, study.ErrInvalid},
		{"tag key with a colon", func(s *study.Study) { s.Tags = map[string]string{"a:b": "c"} }, study.ErrInvalid},
		{"empty tag key", func(s *study.Study) { s.Tags = map[string]string{"": "c"} }, study.ErrInvalid},
		{"malformed id", func(s *study.Study) { s.ID = "../etc" }, study.ErrInvalid},
	}
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		for _, c := range cases {
			t.Run(c.name, func(t *testing.T) {
				st := sample(2, 0)
				c.modify(st)
				if err := s.Save(ctx, st); !errors.Is(err, c.want) {
					t.Fatalf("got %v, want %v", err, c.want)
				}
			})
		}
		t.Run("same id twice", func(t *testing.T) {
			a := sample(2, 1)
			if err := s.Save(ctx, a); err != nil {
				t.Fatal(err)
			}
			b := sample(2, 2)
			b.ID = a.ID
			if err := s.Save(ctx, b); !errors.Is(err, study.ErrConflict) {
				t.Fatalf("got %v, want ErrConflict", err)
			}
			got, err := s.Get(ctx, a.ID)
			if err != nil {
				t.Fatal(err)
			}
			if err := sameStudy(got, a); err != nil {
				t.Errorf("the first study changed: %v", err)
			}
		})
	})
}

func TestList(t *testing.T) {
	const n = 230
	base := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		var all []*study.Study
		for i := range n {
			st := sample(3, i)
			// Pairs share a timestamp, so the id must break ties.
			st.Created = base.Add(time.Duration(i/2) * time.Minute)
			if err := s.Save(ctx, st); err != nil {
				t.Fatal(err)
			}
			all = append(all, st)
		}
		slices.SortFunc(all, func(a, b *study.Study) int {
			if c := b.Created.Compare(a.Created); c != 0 {
				return c
			}
			return strings.Compare(b.ID, a.ID)
		})
		cases := []struct {
			name string
			f    study.Filter
			keep func(*study.Study) bool
		}{
			{"everything", study.Filter{}, func(*study.Study) bool { return true }},
			{"kind", study.Filter{Kind: study.KindCalibration}, func(s *study.Study) bool { return s.Kind == study.KindCalibration }},
			{"label", study.Filter{Label: "series 3 batch 1"}, func(s *study.Study) bool { return s.Label == "series 3 batch 1" }},
			{"one tag", study.Filter{Tags: map[string]string{"analyte": "sodium"}},
				func(s *study.Study) bool { return s.Tags["analyte"] == "sodium" }},
			{"two tags", study.Filter{Tags: map[string]string{"analyte": "urea", "site": "lab-0"}},
				func(s *study.Study) bool { return s.Tags["analyte"] == "urea" && s.Tags["site"] == "lab-0" }},
			{"from", study.Filter{From: base.Add(50 * time.Minute)},
				func(s *study.Study) bool { return !s.Created.Before(base.Add(50 * time.Minute)) }},
			{"to", study.Filter{To: base.Add(17 * time.Minute)},
				func(s *study.Study) bool { return s.Created.Before(base.Add(17 * time.Minute)) }},
			{"from, to, kind and tag", study.Filter{From: base.Add(10 * time.Minute), To: base.Add(90 * time.Minute),
				Kind: study.KindFit, Tags: map[string]string{"site": "lab-1"}},
				func(s *study.Study) bool {
					return !s.Created.Before(base.Add(10*time.Minute)) && s.Created.Before(base.Add(90*time.Minute)) &&
						s.Kind == study.KindFit && s.Tags["site"] == "lab-1"
				}},
			{"nothing matches", study.Filter{Tags: map[string]string{"analyte": "potassium"}}, func(*study.Study) bool { return false }},
		}
		for _, c := range cases {
			for _, limit := range []int{0, 1, 7, 500} {
				t.Run(fmt.Sprintf("%s/limit=%d", c.name, limit), func(t *testing.T) {
					var want []string
					for _, st := range all {
						if c.keep(st) {
							want = append(want, st.ID)
						}
					}
					pageMax := limit
					if pageMax == 0 {
						pageMax = study.DefaultLimit
					}
					f := c.f
					f.Limit = limit
					var got []string
					for pages := 0; ; pages++ {
						if pages > n+1 {
							t.Fatal("the cursor does not advance")
						}
						page, next, err := s.List(ctx, f)
						if err != nil {
							t.Fatal(err)
						}
						if len(page) > pageMax {
							t.Fatalf("page of %d, limit %d", len(page), pageMax)
						}
						for _, sm := range page {
							got = append(got, sm.ID)
						}
						if next == "" {
							break
						}
						if len(page) != pageMax {
							t.Fatalf("short page (%d of %d) with a next cursor", len(page), pageMax)
						}
						f.Cursor = next
					}
					if !slices.Equal(got, want) {
						t.Fatalf("listed %d ids, want %d; first difference at %d", len(got), len(want), firstDiff(got, want))
					}
				})
			}
		}
		t.Run("summaries carry the record", func(t *testing.T) {
			page, _, err := s.List(ctx, study.Filter{Limit: 3})
			if err != nil {
				t.Fatal(err)
			}
			for i, sm := range page {
				st := all[i]
				if sm.ID != st.ID || sm.Kind != st.Kind || sm.Label != st.Label || !sm.Created.Equal(st.Created) ||
					sm.Who != st.Who || sm.InputSHA256 != st.InputSHA256 || sm.Latest != 0 ||
					sm.Tags["analyte"] != st.Tags["analyte"] || len(sm.Tags) != len(st.Tags) {
					t.Errorf("summary %+v does not match study %s", sm, st.ID)
				}
			}
		})
		bad := []struct {
			name string
			f    study.Filter
		}{
			{"negative limit", study.Filter{Limit: -1}},
			{"limit above the maximum", study.Filter{Limit: study.MaxLimit + 1}},
			{"unknown kind", study.Filter{Kind: "other"}},
			{"cursor not ours", study.Filter{Cursor: "abc"}},
			{"cursor with a bad id", study.Filter{Cursor: encodeCursor(base, "x")}},
		}
		for _, c := range bad {
			t.Run(c.name, func(t *testing.T) {
				if _, _, err := s.List(ctx, c.f); !errors.Is(err, study.ErrInvalid) {
					t.Fatalf("got %v, want ErrInvalid", err)
				}
			})
		}
	})
}

func firstDiff(a, b []string) int {
	for i := range min(len(a), len(b)) {
		if a[i] != b[i] {
			return i
		}
	}
	return min(len(a), len(b))
}

func TestRevisions(t *testing.T) {
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		st := sample(4, 0)
		if err := s.Save(ctx, st); err != nil {
			t.Fatal(err)
		}
		changes := []study.Change{
			{Excluded: []study.Exclusion{{ID: "s3", Reason: "haemolysed sample"}}},
			{Excluded: []study.Exclusion{{ID: "s3", Reason: "haemolysed sample"}, {ID: "s17", Reason: "transcription error"}},
				Options: []byte(`{"confidence":0.99}`)},
			{Options: []byte(`{"methods":["deming"]}`)},
		}
		for i, ch := range changes {
			r := &study.Revision{Reason: fmt.Sprintf("revision %d", i+1), Who: "analyst", Change: ch, Result: randomBytes(300)}
			got, err := s.AddRevision(ctx, st.ID, i, r)
			if err != nil {
				t.Fatal(err)
			}
			if got.Number != i+1 || got.BasedOn != i || got.When.IsZero() || got.Hash != study.RevisionHash(st.ID, got) {
				t.Fatalf("revision %d returned as %+v", i+1, got)
			}
		}
		hist := chainOf(t, ctx, s, st)
		if len(hist) != len(changes)+1 {
			t.Fatalf("%d revisions, want %d", len(hist), len(changes)+1)
		}
		for i, ch := range changes {
			r := hist[i+1]
			b1, _ := r.Change.MarshalBinary()
			b2, _ := ch.MarshalBinary()
			if !bytes.Equal(b1, b2) {
				t.Errorf("revision %d: change %+v, want %+v", i+1, r.Change, ch)
			}
		}
		if got, _ := s.Get(ctx, st.ID); sameStudy(got, st) != nil {
			t.Error("revising changed the stored study")
		}
		page, _, err := s.List(ctx, study.Filter{})
		if err != nil || len(page) != 1 || page[0].Latest != len(changes) {
			t.Errorf("List: %+v %v, want latest %d", page, err, len(changes))
		}

		// The chain detects any change to a stored revision (checked on
		// copies; the database refuses changes, below).
		tamper := []struct {
			name string
			do   func(h []study.Revision)
		}{
			{"reason", func(h []study.Revision) { h[1].Reason += "." }},
			{"result byte", func(h []study.Revision) { h[2].Result[0] ^= 1 }},
			{"exclusion reason", func(h []study.Revision) { h[2].Change.Excluded[1].Reason = "other" }},
			{"time", func(h []study.Revision) { h[3].When = h[3].When.Add(time.Microsecond) }},
			{"study result", func(h []study.Revision) { h[0].Result = []byte("x") }},
			{"dropped revision", func(h []study.Revision) { copy(h[2:], h[3:]); h[3] = h[2] }},
		}
		for _, c := range tamper {
			t.Run("tampered "+c.name, func(t *testing.T) {
				h, _ := s.History(ctx, st.ID)
				c.do(h)
				if err := study.VerifyChain(st, h); err == nil {
					t.Fatal("VerifyChain accepted a tampered history")
				}
			})
		}
		t.Run("the database refuses changes and deletions", func(t *testing.T) {
			e := s.(*db).e
			for _, q := range []string{
				"UPDATE revisions SET reason = 'other'", "DELETE FROM revisions",
				"UPDATE studies SET result = input", "DELETE FROM study_tags", "DELETE FROM studies",
			} {
				if err := e.write(ctx, func(tx querier) error { return tx.exec(ctx, q) }); err == nil {
					t.Errorf("%s: accepted", q)
				}
			}
			h, _ := s.History(ctx, st.ID)
			if err := study.VerifyChain(st, h); err != nil || len(h) != len(changes)+1 {
				t.Errorf("history after refused changes: %d revisions, %v", len(h), err)
			}
		})

		refused := []struct {
			name    string
			basedOn int
			r       study.Revision
			want    error
		}{
			{"stale based_on", 1, study.Revision{Reason: "late"}, study.ErrConflict},
			{"based_on beyond the latest", 7, study.Revision{Reason: "early"}, study.ErrConflict},
			{"no reason", 3, study.Revision{Reason: "  "}, study.ErrInvalid},
			{"exclusion without a reason", 3, study.Revision{Reason: "r",
				Change: study.Change{Excluded: []study.Exclusion{{ID: "s1"}}}}, study.ErrInvalid},
			{"negative based_on", -1, study.Revision{Reason: "r"}, study.ErrInvalid},
		}
		for _, c := range refused {
			t.Run(c.name, func(t *testing.T) {
				if _, err := s.AddRevision(ctx, st.ID, c.basedOn, &c.r); !errors.Is(err, c.want) {
					t.Fatalf("got %v, want %v", err, c.want)
				}
			})
		}
	})
}

func TestConcurrentRevisionsOneWins(t *testing.T) {
	const workers, rounds = 12, 4
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		st := sample(5, 0)
		if err := s.Save(ctx, st); err != nil {
			t.Fatal(err)
		}
		for round := range rounds {
			errs := make([]error, workers)
			var start, done sync.WaitGroup
			start.Add(1)
			for w := range workers {
				done.Go(func() {
					start.Wait()
					_, errs[w] = s.AddRevision(ctx, st.ID, round, &study.Revision{
						Reason: fmt.Sprintf("worker %d", w), Who: fmt.Sprintf("w%d", w)})
				})
			}
			start.Done()
			done.Wait()
			won := 0
			for w, err := range errs {
				switch {
				case err == nil:
					won++
				case !errors.Is(err, study.ErrConflict):
					t.Errorf("round %d worker %d: %v, want nil or ErrConflict", round, w, err)
				}
			}
			if won != 1 {
				t.Fatalf("round %d: %d winners, want exactly 1", round, won)
			}
		}
		h := chainOf(t, ctx, s, st)
		if len(h) != rounds+1 {
			t.Fatalf("%d revisions, want %d", len(h), rounds+1)
		}
	})
}

func TestConcurrentSaves(t *testing.T) {
	const workers, each = 8, 10
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		saved := make([][]*study.Study, workers)
		var wg sync.WaitGroup
		for w := range workers {
			wg.Go(func() {
				for i := range each {
					st := sample(uint64(100+w), i)
					if err := s.Save(ctx, st); err != nil {
						t.Errorf("worker %d save %d: %v", w, i, err)
						return
					}
					saved[w] = append(saved[w], st)
				}
			})
		}
		wg.Wait()
		ids := map[string]bool{}
		for w := range saved {
			for _, st := range saved[w] {
				got, err := s.Get(ctx, st.ID)
				if err != nil {
					t.Fatal(err)
				}
				if err := sameStudy(got, st); err != nil {
					t.Fatal(err)
				}
				ids[st.ID] = true
			}
		}
		page, _, err := s.List(ctx, study.Filter{Limit: study.MaxLimit})
		if err != nil || len(page) != workers*each || len(ids) != workers*each {
			t.Fatalf("listed %d, distinct ids %d, want %d (%v)", len(page), len(ids), workers*each, err)
		}
	})
}

func TestSignatures(t *testing.T) {
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		st := sample(6, 0)
		if err := s.Save(ctx, st); err != nil {
			t.Fatal(err)
		}
		r1, err := s.AddRevision(ctx, st.ID, 0, &study.Revision{Reason: "exclude s2", Who: "analyst",
			Change: study.Change{Excluded: []study.Exclusion{{ID: "s2", Reason: "clotted"}}}})
		if err != nil {
			t.Fatal(err)
		}
		before := time.Now().Add(-time.Second)
		signs := []struct {
			name string
			rev  int
			sig  study.Signature
			want error
		}{
			{"review of the original", 0, study.Signature{Meaning: study.MeaningReviewed, Signer: "rev-a", Comment: "ok"}, nil},
			{"review of revision 1 with its hash", 1, study.Signature{Meaning: study.MeaningReviewed, Signer: "rev-a",
				RevisionHash: r1.Hash}, nil},
			{"approval of revision 1", 1, study.Signature{Meaning: study.MeaningApproved, Signer: "boss",
				When: time.Date(1999, 1, 1, 0, 0, 0, 0, time.UTC)}, nil},
			{"the same signature again", 1, study.Signature{Meaning: study.MeaningApproved, Signer: "boss"}, study.ErrConflict},
			{"a hash that is not the revision's", 0, study.Signature{Meaning: study.MeaningApproved, Signer: "boss",
				RevisionHash: r1.Hash}, study.ErrConflict},
			{"missing revision", 2, study.Signature{Meaning: study.MeaningApproved, Signer: "boss"}, study.ErrNotFound},
			{"unknown meaning", 1, study.Signature{Meaning: "seen", Signer: "boss"}, study.ErrInvalid},
			{"no signer", 1, study.Signature{Meaning: study.MeaningReviewed}, study.ErrInvalid},
		}
		for _, c := range signs {
			t.Run(c.name, func(t *testing.T) {
				sig := c.sig
				err := s.Sign(ctx, st.ID, c.rev, &sig)
				if !errors.Is(err, c.want) || (c.want == nil) != (err == nil) {
					t.Fatalf("got %v, want %v", err, c.want)
				}
				if err == nil && (sig.When.Before(before) || sig.Revision != c.rev) {
					t.Errorf("the store did not set the server's time and revision: %+v", sig)
				}
			})
		}
		// A later revision starts without signatures.
		if _, err := s.AddRevision(ctx, st.ID, 1, &study.Revision{Reason: "use Deming", Who: "analyst"}); err != nil {
			t.Fatal(err)
		}
		h := chainOf(t, ctx, s, st)
		want := [][]string{{"reviewed by rev-a"}, {"approved by boss", "reviewed by rev-a"}, nil}
		for i, r := range h {
			var got []string
			for _, sig := range r.Signatures {
				got = append(got, string(sig.Meaning)+" by "+sig.Signer)
			}
			slices.Sort(got)
			if !slices.Equal(got, want[i]) {
				t.Errorf("revision %d signed %v, want %v", i, got, want[i])
			}
		}
		if c := h[0].Signatures[0].Comment; c != "ok" {
			t.Errorf("comment %q", c)
		}
	})
}

func TestNotFound(t *testing.T) {
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		for _, id := range []string{study.NewID(), "not-an-id", "", strings.ToUpper(study.NewID())} {
			t.Run(fmt.Sprintf("%q", id), func(t *testing.T) {
				_, err1 := s.Get(ctx, id)
				_, err2 := s.History(ctx, id)
				_, err3 := s.AddRevision(ctx, id, 0, &study.Revision{Reason: "r"})
				err4 := s.Sign(ctx, id, 0, &study.Signature{Meaning: study.MeaningReviewed, Signer: "a"})
				for i, err := range []error{err1, err2, err3, err4} {
					if !errors.Is(err, study.ErrNotFound) {
						t.Errorf("call %d: %v, want ErrNotFound", i+1, err)
					}
				}
			})
		}
	})
}

func TestUnavailable(t *testing.T) {
	ctx := context.Background()
	eachEngine(t, func(t *testing.T, cfg Config) {
		s, err := Open(ctx, cfg)
		if err != nil {
			t.Fatal(err)
		}
		st := sample(7, 0)
		if err := s.Save(ctx, st); err != nil {
			t.Fatal(err)
		}
		if err := s.Ping(ctx); err != nil {
			t.Fatal(err)
		}
		s.Close()
		calls := map[string]func() error{
			"save":         func() error { return s.Save(ctx, sample(7, 1)) },
			"get":          func() error { _, err := s.Get(ctx, st.ID); return err },
			"list":         func() error { _, _, err := s.List(ctx, study.Filter{}); return err },
			"add_revision": func() error { _, err := s.AddRevision(ctx, st.ID, 0, &study.Revision{Reason: "r"}); return err },
			"history":      func() error { _, err := s.History(ctx, st.ID); return err },
			"sign": func() error {
				return s.Sign(ctx, st.ID, 0, &study.Signature{Meaning: study.MeaningReviewed, Signer: "a"})
			},
			"ping": func() error { return s.Ping(ctx) },
		}
		for name, call := range calls {
			if err := call(); !errors.Is(err, study.ErrUnavailable) {
				t.Errorf("%s after Close: %v, want ErrUnavailable", name, err)
			}
		}
	})
	t.Run("sqlite data directory that cannot be made", func(t *testing.T) {
		file := t.TempDir() + "/file"
		if err := writeFile(file); err != nil {
			t.Fatal(err)
		}
		if _, err := Open(ctx, Config{DataDir: file + "/data"}); !errors.Is(err, study.ErrUnavailable) {
			t.Fatalf("got %v, want ErrUnavailable", err)
		}
	})
	t.Run("postgres nobody listens on", func(t *testing.T) {
		pgURL(t)
		port := closedPort(t)
		start := time.Now()
		_, err := Open(ctx, Config{DatabaseURL: fmt.Sprintf("postgres://eivfit@127.0.0.1:%d/eivfit?sslmode=disable", port),
			BusyTimeout: 2 * time.Second})
		if !errors.Is(err, study.ErrUnavailable) {
			t.Fatalf("got %v, want ErrUnavailable", err)
		}
		if strings.Contains(err.Error(), "password") {
			t.Errorf("error mentions a password: %v", err)
		}
		t.Logf("refused after %v: %v", time.Since(start).Round(time.Millisecond), err)
	})
}

func TestObserve(t *testing.T) {
	eachEngine(t, func(t *testing.T, cfg Config) {
		var (
			mu  sync.Mutex
			ops []string
		)
		cfg.Observe = func(op string, d time.Duration, err error) {
			mu.Lock()
			defer mu.Unlock()
			ops = append(ops, fmt.Sprintf("%s:%v", op, err == nil))
			if d < 0 {
				t.Errorf("%s: negative duration", op)
			}
		}
		s := mustOpen(t, cfg)
		ctx := context.Background()
		st := sample(8, 0)
		s.Save(ctx, st)
		s.Get(ctx, st.ID)
		s.Get(ctx, study.NewID())
		s.List(ctx, study.Filter{})
		mu.Lock()
		defer mu.Unlock()
		want := []string{"save:true", "get:true", "get:false", "list:true"}
		if !slices.Equal(ops, want) {
			t.Fatalf("observed %v, want %v", ops, want)
		}
	})
}

func TestMigrations(t *testing.T) {
	eachEngine(t, func(t *testing.T, cfg Config) {
		ctx := context.Background()
		// Replicas starting together: every Open succeeds and each step is
		// applied once. On SQLite, a new database is opened together in
		// many rounds: opens racing to create it once failed one time in
		// about 75 rounds with "database is locked" (see createWAL).
		const n = 6
		rounds := 1
		if cfg.DataDir != "" {
			rounds = 40
		}
		var stores []study.Store
		rc := cfg
		for round := range rounds {
			rc = cfg
			if cfg.DataDir != "" {
				rc.DataDir = filepath.Join(cfg.DataDir, strconv.Itoa(round))
			}
			stores = make([]study.Store, n)
			errs := make([]error, n)
			var wg sync.WaitGroup
			for i := range n {
				wg.Go(func() { stores[i], errs[i] = Open(ctx, rc) })
			}
			wg.Wait()
			for i := range n {
				if errs[i] != nil {
					t.Fatalf("round %d, open %d: %v", round, i, errs[i])
				}
				defer stores[i].Close()
			}
			if rc.DataDir != "" {
				// Nothing but the database and its WAL files is left behind.
				entries, err := os.ReadDir(rc.DataDir)
				if err != nil {
					t.Fatal(err)
				}
				for _, e := range entries {
					if !strings.HasPrefix(e.Name(), DatabaseFile) {
						t.Errorf("round %d: %s left in the data directory", round, e.Name())
					}
				}
			}
		}
		steps, err := loadMigrations(stores[0].(*db).e.name())
		if err != nil {
			t.Fatal(err)
		}
		var count, maxVersion int64
		if err := stores[0].(*db).e.queryRow(ctx, "SELECT count(*), max(version) FROM schema_migrations", nil, &count, &maxVersion); err != nil {
			t.Fatal(err)
		}
		if count != int64(len(steps)) || maxVersion != int64(len(steps)) {
			t.Fatalf("schema_migrations has %d rows up to %d, want %d", count, maxVersion, len(steps))
		}
		// A database migrated by a newer eivfit is refused, not used.
		e := stores[0].(*db).e
		if err := e.write(ctx, func(q querier) error {
			return q.exec(ctx, "INSERT INTO schema_migrations (version, name, applied) VALUES (999, 'future', 'now')")
		}); err != nil {
			t.Fatal(err)
		}
		if _, err := Open(ctx, rc); err == nil || !strings.Contains(err.Error(), "schema version 999") {
			t.Fatalf("a newer schema was accepted: %v", err)
		}
	})
}

// A new SQLite database is created in WAL mode before any store connects
// to it: bytes 18 and 19 of the header (the file format's write and read
// versions) are 2, which means WAL (SQLite's file format document,
// https://sqlite.org/fileformat2.html, "The database header").
func TestCreateWAL(t *testing.T) {
	path := filepath.Join(t.TempDir(), DatabaseFile)
	for i := range 2 { // the second call finds the file and leaves it as it is
		if err := createWAL(context.Background(), path); err != nil {
			t.Fatalf("call %d: %v", i, err)
		}
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		if len(b) < 100 || string(b[:16]) != "SQLite format 3\x00" || b[18] != 2 || b[19] != 2 {
			t.Fatalf("call %d: %d bytes, header %q", i, len(b), b[:min(len(b), 20)])
		}
	}
	entries, _ := os.ReadDir(filepath.Dir(path))
	if len(entries) != 1 {
		t.Errorf("files left: %v", entries)
	}
}

func TestMigrationFilesBothEngines(t *testing.T) {
	for _, engine := range []string{"sqlite", "postgres"} {
		steps, err := loadMigrations(engine)
		if err != nil || len(steps) == 0 {
			t.Fatalf("%s: %d steps, %v", engine, len(steps), err)
		}
	}
	a, _ := loadMigrations("sqlite")
	b, _ := loadMigrations("postgres")
	if len(a) != len(b) {
		t.Fatalf("sqlite has %d migrations, postgres %d: every schema change is made on both", len(a), len(b))
	}
}

// The settings durability rests on are in force on the connections that write.
func TestDurableSettings(t *testing.T) {
	eachEngine(t, func(t *testing.T, cfg Config) {
		s := mustOpen(t, cfg)
		ctx := context.Background()
		var checks []struct{ q, want string }
		var q querier
		switch e := s.(*db).e.(type) {
		case *sqliteEngine:
			q = sqlQuerier{q: e.w}
			checks = []struct{ q, want string }{{"PRAGMA journal_mode", "wal"}, {"PRAGMA synchronous", "2"}, {"PRAGMA foreign_keys", "1"}}
		case *pgEngine:
			q = e
			checks = []struct{ q, want string }{{"SHOW synchronous_commit", "on"}, {"SHOW fsync", "on"}}
		}
		for _, c := range checks {
			var got string
			if err := q.queryRow(ctx, c.q, nil, &got); err != nil || got != c.want {
				t.Errorf("%s = %q (%v), want %q", c.q, got, err, c.want)
			}
		}
	})
}
