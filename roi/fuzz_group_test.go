package roi

import (
	"bytes"
	"errors"
	"math"
	"testing"
)

// FuzzParseParticipants reads participants tables (BIDS participants.tsv or
// a subject column): an accepted table has an identifier column.
func FuzzParseParticipants(f *testing.F) {
	f.Add([]byte("participant_id\tgroup\tage\nsub-01\tcontrol\t30\nsub-02\tpatient\tn/a\n"))
	f.Add([]byte("subject,group\n01,a\n01,b\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		p, err := ParseParticipants("participants.tsv", bytes.NewReader(data))
		if err != nil {
			var ie *InputError
			if !errors.As(err, &ie) || ie.File != "participants.tsv" {
				t.Fatalf("error %T %v is not an *InputError naming the file", err, err)
			}
			return
		}
		if p.IDColumn == "" || len(p.Columns) == 0 {
			t.Fatalf("accepted a table without an identifier column: %+v", p)
		}
	})
}

// FuzzParseSubjectContrasts reads subject-level tables brought to the group
// command: accepted rows have labels and no infinite number (a missing
// estimate is read as NaN on purpose: group lists and leaves out those
// subjects).
func FuzzParseSubjectContrasts(f *testing.F) {
	f.Add([]byte("subject,region,contrast,runs,estimate,std_error,statistic,df,p_value,q_value,psc\n01,keel,glint,2,5.1,1.2,4.2,450,1e-5,1e-4,0.9\n"))
	f.Add([]byte("subject,region,contrast,estimate\n01,a,c,1\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := ParseSubjectContrasts("subject_contrasts.csv", bytes.NewReader(data))
		if err != nil {
			var ie *InputError
			if !errors.As(err, &ie) || ie.File != "subject_contrasts.csv" {
				t.Fatalf("error %T %v is not an *InputError naming the file", err, err)
			}
			return
		}
		for _, r := range s.Rows {
			if r.Subject == "" || r.Region == "" || r.Contrast == "" || math.IsInf(r.Estimate, 0) || math.IsInf(r.StdError, 0) || math.IsInf(r.PSC, 0) {
				t.Fatalf("invalid row accepted: %+v", r)
			}
		}
	})
}
