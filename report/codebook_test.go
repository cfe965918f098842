package report

import (
	"flag"
	"os"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the README's codebook section from the column definitions")

const (
	codebookStart = "<!-- codebook:start -->\n"
	codebookEnd   = "<!-- codebook:end -->"
)

// TestCodebookInReadme fails when the README's codebook differs from the
// column definitions the writers use.
func TestCodebookInReadme(t *testing.T) {
	path := "../README.md"
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := string(b)
	i := strings.Index(s, codebookStart)
	j := strings.Index(s, codebookEnd)
	if i < 0 || j < i {
		t.Fatalf("README.md has no codebook markers")
	}
	want := CodebookMarkdown()
	got := s[i+len(codebookStart) : j]
	if got == want {
		return
	}
	if *update {
		s = s[:i+len(codebookStart)] + want + s[j:]
		if err := os.WriteFile(path, []byte(s), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	t.Errorf("README.md codebook differs from report/columns.go; run go test ./report -run Codebook -update")
}

// TestTablesMatchContract pins the column order of the contract
// (../shared/INTERFACE.md, "Outputs"), typed here so that a change to the
// definitions that breaks the contract fails.
func TestTablesMatchContract(t *testing.T) {
	want := map[string]string{
		"estimates.csv":         "subject,session,run,region,term,estimate,std_error,statistic,df,p_value,psc",
		"contrasts.csv":         "subject,session,run,region,contrast,estimate,std_error,statistic,df,p_value,q_value,psc",
		"subject_contrasts.csv": "subject,region,contrast,runs,estimate,std_error,statistic,df,p_value,q_value,psc",
		"diagnostics.csv":       "subject,session,run,region,volumes,censored,df,sigma,r_squared,noise,ar_order,ar_coefficients,durbin_watson,ljung_box_p,normality_p,tsnr,ma_coefficients,white_share,noise_scope,noise_passes",
		"autocorrelation.csv":   "subject,session,run,region,lag,raw,whitened",
		// "Added with the design issue".
		"motion.csv":    "subject,session,run,volume,fd,censored",
		"audit.csv":     "subject,session,run,item,measure,value,flag",
		"ftests.csv":    "subject,session,run,region,test,statistic,df_num,df_den,p_value,q_value",
		"responses.csv": "subject,session,run,region,condition,time,estimate,std_error,psc",
	}
	for _, tab := range Tables {
		if got := strings.Join(tab.Header(), ","); got != want[tab.File] {
			t.Errorf("%s: %s\nwant %s", tab.File, got, want[tab.File])
		}
		delete(want, tab.File)
	}
	if len(want) > 0 {
		t.Errorf("tables missing from Tables: %v", want)
	}
}

func TestNum(t *testing.T) {
	for _, c := range []struct {
		v    float64
		want string
	}{{0.1, "0.1"}, {1e-300, "1e-300"}, {123456789, "1.23456789e+08"}, {-2.5, "-2.5"}} {
		if got := Num(c.v); got != c.want {
			t.Errorf("Num(%g) = %q, want %q", c.v, got, c.want)
		}
	}
}
