package report

import (
	"strconv"
	"strings"
	"time"
)

// SetProduced sets the report's time, so that a stored study's report
// shows when it was computed rather than when it was rendered again.
func (p *Page) SetProduced(t time.Time) {
	v := t.UTC().Format(time.RFC3339)
	for i := range p.Meta {
		if p.Meta[i].Key == "Produced" {
			p.Meta[i].Value = v
			return
		}
	}
	p.Meta = append(p.Meta, KV{Key: "Produced", Value: v})
}

// StudyRecord is a saved study's audit trail up to the revision a report
// shows.
type StudyRecord struct {
	ID           string
	Revision     int // the revision shown
	SavedVersion string
	History      []RecordEntry // revisions 0 … Revision, oldest first
	Signatures   []RecordSignature
}

// RecordEntry is one revision in a report's audit trail.
type RecordEntry struct {
	Number   int
	Who      string
	When     time.Time
	Reason   string
	Excluded []string // "ID: reason"
	Options  string   // the options it changed, as JSON
	Hash     string
}

// RecordSignature is one signature on the revision shown.
type RecordSignature struct {
	Meaning, Signer, Comment, RevisionHash string
	When                                   time.Time
}

// AddRecord appends the study record section: the id, the revision shown,
// its history and the signatures on that revision (never those of an
// earlier one).
func (p *Page) AddRecord(r *StudyRecord) {
	sec := Section{Heading: "Study record", Text: []string{
		"Study " + r.ID + ", revision " + strconv.Itoa(r.Revision) + "; saved by eivfit " + r.SavedVersion +
			". The record is kept unchanged; each revision is recomputed from the stored input and chained by its hash to the one before."}}
	hist := Table{Caption: "History", Header: []string{"Revision", "When (UTC)", "Who", "Why", "What changed", "Hash"}, Numeric: []int{0}}
	for _, e := range r.History {
		what := "saved"
		if e.Number > 0 {
			var parts []string
			if len(e.Excluded) > 0 {
				parts = append(parts, "excluded "+strings.Join(e.Excluded, "; "))
			}
			if e.Options != "" {
				parts = append(parts, "options "+e.Options)
			}
			what = strings.Join(parts, "; ")
		}
		hist.Rows = append(hist.Rows, Row{Cells: []string{strconv.Itoa(e.Number), e.When.UTC().Format(time.RFC3339),
			e.Who, e.Reason, what, e.Hash}})
	}
	sec.Tables = append(sec.Tables, hist)
	sigs := Table{Caption: "Signatures on revision " + strconv.Itoa(r.Revision), Header: []string{"Meaning", "Signer", "When (UTC)", "Comment", "Revision hash"}}
	for _, s := range r.Signatures {
		sigs.Rows = append(sigs.Rows, Row{Cells: []string{s.Meaning, s.Signer, s.When.UTC().Format(time.RFC3339), s.Comment, s.RevisionHash}})
	}
	if len(sigs.Rows) == 0 {
		sec.Text = append(sec.Text, "No signature on this revision yet.")
	} else {
		sec.Tables = append(sec.Tables, sigs)
	}
	p.Sections = append(p.Sections, sec)
}
