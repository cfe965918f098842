package roi

import (
	"math"
	"path/filepath"
	"strings"
	"testing"
)

// TestSubjectContrastsReference reads the reference subject table of the
// group checks: the full column set of subject_contrasts.csv, one row with
// missing values.
func TestSubjectContrastsReference(t *testing.T) {
	sc, err := ReadSubjectContrasts(filepath.Join("..", "testdata", "reference", "group", "subject_contrasts.csv"))
	if err != nil {
		t.Fatal(err)
	}
	if len(sc.Rows) != 204 || !sc.HasStdError || !sc.HasPSC {
		t.Fatalf("%d rows, std_error %v, psc %v", len(sc.Rows), sc.HasStdError, sc.HasPSC)
	}
	missing := 0
	for _, r := range sc.Rows {
		if math.IsNaN(r.Estimate) {
			missing++
			if r.Subject != "05" || r.Region != "spire" || r.Contrast != "glint" || !math.IsNaN(r.PSC) {
				t.Errorf("unexpected missing row %+v", r)
			}
		}
	}
	if missing != 1 || sc.Rows[0].Line != 2 || sc.Rows[0].Subject != "01" {
		t.Errorf("%d missing rows; first row %+v", missing, sc.Rows[0])
	}
}

// TestSubjectContrastsElsewhere: a table made by another tool, tab-separated,
// other column order and case, only the required columns.
func TestSubjectContrastsElsewhere(t *testing.T) {
	const table = "Contrast\tSubject\tRegion\tEstimate\tnote\nfaces\tsub-01\tFFA\t0.42\tok\nfaces\tsub-02\tFFA\tNA\tscanner fault\n"
	sc, err := ParseSubjectContrasts("betas.tsv", strings.NewReader(table))
	if err != nil {
		t.Fatal(err)
	}
	if len(sc.Rows) != 2 || sc.HasStdError || sc.HasPSC || sc.Rows[0].Estimate != 0.42 || !math.IsNaN(sc.Rows[1].Estimate) ||
		sc.Rows[1].Subject != "sub-02" || sc.Rows[1].Contrast != "faces" || !math.IsNaN(sc.Rows[0].StdError) {
		t.Errorf("read %+v", sc)
	}
}

func TestSubjectContrastsBad(t *testing.T) {
	const head = "subject,region,contrast,estimate,std_error\n"
	for _, c := range []badCase{
		{"no estimate", "subject,region,contrast,psc\n01,keel,order,0.3\n", 1, 0, []string{`no column "estimate"`, "optionally std_error and psc"}},
		{"repeated", head + "01,keel,order,1,0.1\n02,keel,order,1,0.1\n01,keel,order,2,0.1\n", 4, 0, []string{`subject "01", region "keel", contrast "order" again: line 2`}},
		{"text estimate", head + "01,keel,order,big,0.1\n", 2, 4, []string{`"big" is not a number`, `column "estimate"`}},
		{"decimal comma", "subject;region;contrast;estimate\n01;keel;order;0,5\n", 2, 4, []string{"decimal comma"}},
		{"negative se", head + "01,keel,order,1,-0.1\n", 2, 5, []string{"negative"}},
		{"no region", head + "01,,order,1,0.1\n", 2, 2, []string{"empty cell", "region label in every row"}},
		{"no rows", head, 1, 0, []string{"a header and no rows"}},
		{"twice", "subject,Subject,region,contrast,estimate\n", 1, 2, []string{"at most once"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseSubjectContrasts("subject_contrasts.csv", strings.NewReader(c.input))
			checkInputError(t, err, "subject_contrasts.csv", c.line, c.col, c.frags...)
		})
	}
}
