package roi

import (
	"math"
	"path/filepath"
	"strings"
	"testing"
)

// TestParticipantsBIDS reads the real participants tables of ds001 (TSV,
// participant_id with the sub- prefix) and ds114 (CRLF line ends).
func TestParticipantsBIDS(t *testing.T) {
	p, err := ReadParticipants(filepath.Join("..", "testdata", "bids", "ds001", "participants.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	if p.Len() != 16 || p.IDColumn != "participant_id" || strings.Join(p.Columns, ",") != "participant_id,sex,age" {
		t.Fatalf("ds001: %d rows, id %q, columns %v", p.Len(), p.IDColumn, p.Columns)
	}
	for _, c := range []struct {
		label string
		row   int
	}{{"01", 0}, {"sub-01", 0}, {"16", 15}, {"17", -1}, {"1", -1}} {
		if got := p.Row(c.label); got != c.row {
			t.Errorf("Row(%q) = %d, want %d", c.label, got, c.row)
		}
	}
	if err := p.Require("sex", "age"); err != nil {
		t.Fatal(err)
	}
	if v, missing := p.Text(1, "sex"); v != "M" || missing {
		t.Errorf("sub-02 sex = %q (missing %v), want M", v, missing)
	}
	if v, err := p.Number(13, "age"); err != nil || v != 30 {
		t.Errorf("sub-14 age = %g, %v; want 30", v, err)
	}
	if got := p.Cell(13, "Age"); got != filepath.Join("..", "testdata", "bids", "ds001", "participants.tsv")+":15:3" {
		t.Errorf("Cell = %q", got)
	}
	q, err := ReadParticipants(filepath.Join("..", "testdata", "bids", "ds114", "participants.tsv"))
	if err != nil {
		t.Fatal(err)
	}
	if v, _ := q.Text(q.Row("10"), "dominant_hand"); q.Len() != 10 || v != "left" {
		t.Errorf("ds114: %d rows, sub-10 hand %q", q.Len(), v)
	}
}

func TestParticipantsValues(t *testing.T) {
	const table = "subject,group,age\n01,patient,31.5\n02,control,n/a\n03,,40\n"
	p, err := ParseParticipants("p.csv", strings.NewReader(table))
	if err != nil {
		t.Fatal(err)
	}
	if v, err := p.Number(1, "age"); err != nil || !math.IsNaN(v) {
		t.Errorf("n/a age = %g, %v; want NaN without error", v, err)
	}
	if _, missing := p.Text(2, "group"); !missing {
		t.Errorf("an empty group cell is not missing")
	}
	_, err = p.Number(0, "group")
	checkInputError(t, err, "p.csv", 2, 2, `"patient" is not a number`, `column "group"`, "covariate")
	checkInputError(t, p.Require("group", "handedness", "iq"), "p.csv", 1, 0, `no columns "handedness" and "iq"`, `"subject", "group", "age"`)
}

func TestParticipantsBad(t *testing.T) {
	for _, c := range []badCase{
		{"no id column", "name\tage\nsub-01\t20\n", 1, 0, []string{`no column "subject" or "participant_id"`, `"name", "age"`}},
		{"prefix twice", "participant_id\tage\nsub-01\t20\n01\t21\n", 3, 1, []string{`subject "01" again: line 2`, "sub- prefix"}},
		{"empty id", "participant_id,age\nsub-01,20\nn/a,21\n", 3, 1, []string{`missing value "n/a"`, "subject label in every row"}},
		{"ragged", "participant_id,age\nsub-01,20,x\n", 2, 0, []string{"found 3 cells"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseParticipants("participants.tsv", strings.NewReader(c.input))
			checkInputError(t, err, "participants.tsv", c.line, c.col, c.frags...)
		})
	}
}

// TestParticipantsSubjectWins: with both identifier columns, subject is used.
func TestParticipantsSubjectWins(t *testing.T) {
	p, err := ParseParticipants("p.csv", strings.NewReader("participant_id,Subject\nsub-9,07\n"))
	if err != nil {
		t.Fatal(err)
	}
	if p.IDColumn != "Subject" || p.Row("07") != 0 || p.Row("9") != -1 || p.ID(0) != "07" {
		t.Errorf("id column %q, rows %d %d", p.IDColumn, p.Row("07"), p.Row("9"))
	}
}
