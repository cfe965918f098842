package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestCorrelatedConditionsWarned: a study whose two conditions correlate
// above 0.9 gets a warning in check's output and in report.md, and check
// prints the audit table.
func TestCorrelatedConditionsWarned(t *testing.T) {
	study := simulateStudy(t, 1, 1, 4, 200, 3)
	dir := filepath.Dir(study)
	var b strings.Builder
	b.WriteString("onset\tduration\ttrial_type\n")
	for k := 0; k < 18; k++ {
		on := 10 + 21*k
		fmt.Fprintf(&b, "%d\t6\tpress\n%d\t6\trelease\n", on, on+1)
	}
	ev := filepath.Join(dir, "sub-01", "sub-01_run-1_events.tsv")
	writeFile(t, ev, b.String())
	stdout, _ := mustRun(t, "check", study)
	for _, want := range []string{"design audit", "max_correlation", "vif", "`press` and `release` correlate at 0.9", "their sum is not"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("check output lacks %q:\n%s", want, stdout)
		}
	}
	out := filepath.Join(t.TempDir(), "res")
	mustRun(t, "fit", study, "-o", out)
	rep := readFile(t, filepath.Join(out, "report.md"))
	if !strings.Contains(rep, "`press` and `release` correlate at 0.9") || !strings.Contains(rep, "### Design audit") {
		t.Errorf("report.md lacks the audit warning")
	}
	aud := readCSV(t, filepath.Join(out, "audit.csv"))
	if strings.Join(aud[0], ",") != "subject,session,run,item,measure,value,flag" {
		t.Errorf("audit.csv header %v", aud[0])
	}
	flagged := false
	for _, r := range aud[1:] {
		if r[4] == "max_correlation" && r[6] == "high" {
			flagged = true
		}
	}
	if !flagged {
		t.Errorf("audit.csv does not flag the correlation")
	}
}

// TestCensoringOutputs: with --censor-fd, volumes above the threshold get
// censor:V terms, motion.csv marks them, and diagnostics counts them.
func TestCensoringOutputs(t *testing.T) {
	study := simulateStudy(t, 1, 1, 3, 120, 5)
	dir := filepath.Dir(study)
	conf := filepath.Join(dir, "sub-01", "sub-01_run-1_confounds.csv")
	lines := strings.Split(strings.TrimRight(readFile(t, conf), "\n"), "\n")
	// Move the head 3 mm along x at volume 40 and back at volume 41.
	cells := strings.Split(lines[41], ",")
	cells[0] = "3"
	lines[41] = strings.Join(cells, ",")
	writeFile(t, conf, strings.Join(lines, "\n")+"\n")
	out := filepath.Join(t.TempDir(), "res")
	mustRun(t, "fit", study, "-o", out, "--censor-fd", "1")
	design := readCSV(t, filepath.Join(out, "design", "01_1.csv"))
	head := strings.Join(design[0], ",")
	if !strings.Contains(head, "censor:40,censor:41,intercept") {
		t.Errorf("design header %s lacks censor:40,censor:41 before the intercept", head)
	}
	mot := readCSV(t, filepath.Join(out, "motion.csv"))
	var censored []string
	for _, r := range mot[1:] {
		if r[5] == "1" {
			censored = append(censored, r[3])
		}
	}
	if strings.Join(censored, ",") != "40,41" {
		t.Errorf("motion.csv censors volumes %v, want 40,41", censored)
	}
	diag := readCSV(t, filepath.Join(out, "diagnostics.csv"))
	if diag[1][5] != "2" {
		t.Errorf("diagnostics censored = %s, want 2", diag[1][5])
	}
	if _, err := os.Stat(filepath.Join(out, "audit.csv")); err != nil {
		t.Error(err)
	}
}
