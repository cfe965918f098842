package main

import (
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/tessera-fmri/tessera/report"
)

// The group command end to end, against the R reference of
// testdata/reference/group (see its README): the reference subject table
// and the real ds001 participants table go through `tessera group` with
// the flags of each analysis of group.R, and group.csv and power.csv are
// compared with R's values.

var (
	groupRefDir     = filepath.Join("..", "..", "testdata", "reference", "group")
	ds001Partcipant = filepath.Join("..", "..", "testdata", "bids", "ds001", "participants.tsv")
)

// Tolerances, as in fit/group_reference_test.go: the 1e-8 for
// t-based results (measured 1e-11 at worst), 1e-5 for τ² on the scale of
// the larger of τ² and the squared standard errors (measured 1e-10).
const (
	tolGroupCLI = 1e-8
	tolTau2CLI  = 1e-5
)

// groupCLIAnalyses maps the analyses of group.R to the command's flags.
var groupCLIAnalyses = map[string][]string{
	"one_sample":         nil,
	"compare":            {"--participants", ds001Partcipant, "--compare", "sex"},
	"covariate":          {"--participants", ds001Partcipant, "--covariates", "age"},
	"compare_covariate":  {"--participants", ds001Partcipant, "--compare", "sex", "--covariates", "age"},
	"weighted":           {"--weighted"},
	"weighted_compare":   {"--participants", ds001Partcipant, "--compare", "sex", "--weighted"},
	"weighted_covariate": {"--participants", ds001Partcipant, "--covariates", "age", "--weighted"},
}

// groupFolder copies the reference subject table into a new folder, as a
// fit output folder would hold it.
func groupFolder(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "results")
	writeFile(t, filepath.Join(dir, "subject_contrasts.csv"), readFile(t, filepath.Join(groupRefDir, "subject_contrasts.csv")))
	return dir
}

func TestGroupCommandAgainstR(t *testing.T) {
	want := readCSV(t, filepath.Join(groupRefDir, "group_results.csv"))
	wantPower := readCSV(t, filepath.Join(groupRefDir, "group_power.csv"))
	// The largest squared standard error of the table: the scale τ² is
	// compared on (an upper bound of the mean used in package fit's test).
	maxSE2 := 0.0
	for _, r := range readCSV(t, filepath.Join(groupRefDir, "subject_contrasts.csv"))[1:] {
		if r[10] != "" {
			se := mustFloat(t, r[5]) * mustFloat(t, r[10]) / mustFloat(t, r[4])
			maxSE2 = math.Max(maxSE2, se*se)
		}
	}
	for analysis, flags := range groupCLIAnalyses {
		t.Run(analysis, func(t *testing.T) {
			dir := groupFolder(t)
			_, stderr := mustRun(t, append([]string{"group", dir}, flags...)...)
			if !strings.Contains(stderr, "warning: contrast glint, region spire: no psc for subject 05; left out of this region") {
				t.Errorf("stderr does not list the missing value:\n%s", stderr)
			}
			if len(flags) > 1 && flags[0] == "--participants" && !strings.Contains(stderr, "warning: subject 17 not in the participants table "+ds001Partcipant+"; left out of every model") {
				t.Errorf("stderr does not list the subject missing from the participants table:\n%s", stderr)
			}
			got := readCSV(t, filepath.Join(dir, "group.csv"))
			if strings.Join(got[0], ",") != strings.Join(report.GroupResults.Header(), ",") {
				t.Fatalf("group.csv header %v", got[0])
			}
			var rows [][]string
			for _, r := range want[1:] {
				if r[0] == analysis {
					rows = append(rows, r[1:])
				}
			}
			compareRows(t, "group.csv", got[1:], rows, maxSE2)
			var prow [][]string
			for _, r := range wantPower[1:] {
				if r[0] == analysis {
					prow = append(prow, r[1:])
				}
			}
			compareRows(t, "power.csv", readCSV(t, filepath.Join(dir, "power.csv"))[1:], prow, 0)
		})
	}
}

// compareRows compares a written table with R's rows in order: labels and
// sample sizes exactly, tau2 (column 14 of group.csv) on the τ² scale, the
// rest to tolGroupCLI relative.
func compareRows(t *testing.T, file string, got, want [][]string, tauScale float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d rows, R %d", file, len(got), len(want))
	}
	exact := map[int]bool{0: true, 1: true, 2: true, 3: true}
	if file == "power.csv" {
		exact[5], exact[6] = true, true
	}
	for i := range got {
		for j := range want[i] {
			g, w := got[i][j], want[i][j]
			switch {
			case exact[j] || g == "" || w == "":
				if g != w {
					t.Errorf("%s row %d col %d: %q, R %q", file, i+1, j+1, g, w)
				}
			case file == "group.csv" && j == 14:
				if d := math.Abs(mustFloat(t, g) - mustFloat(t, w)); d > tolTau2CLI*math.Max(mustFloat(t, w), tauScale) {
					t.Errorf("%s row %d tau2: %s, metafor %s", file, i+1, g, w)
				}
			default:
				gv, wv := mustFloat(t, g), mustFloat(t, w)
				if math.Abs(gv-wv) > tolGroupCLI*math.Max(1, math.Abs(wv)) {
					t.Errorf("%s row %d (%s) col %d: %s, R %s", file, i+1, strings.Join(got[i][:3], " "), j+1, g, w)
				}
			}
		}
	}
}

func mustFloat(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestGroupParticipantsMissingValues: subjects with a missing value in a
// column the model uses, or without a row, are listed by name and left
// out; the rest of the study is analysed.
func TestGroupParticipantsMissingValues(t *testing.T) {
	dir := groupFolder(t)
	parts := filepath.Join(t.TempDir(), "participants.csv")
	var b strings.Builder
	b.WriteString("participant_id,group,age\n")
	for i := 1; i <= 15; i++ {
		g, age := []string{"control", "patient"}[i%2], strconv.Itoa(20+i)
		switch i {
		case 3:
			age = "n/a"
		case 8:
			g = ""
		}
		b.WriteString("sub-" + pad2(i) + "," + g + "," + age + "\n")
	}
	writeFile(t, parts, b.String())
	out := filepath.Join(t.TempDir(), "out")
	stdout, stderr := mustRun(t, "group", dir, "-o", out, "--participants", parts, "--compare", "group", "--covariates", "age")
	for _, w := range []string{
		"warning: subjects 16, 17 not in the participants table " + parts + "; left out of every model",
		"warning: subjects with a missing value in the participants table " + parts + ": 03 (age), 08 (group); left out of every model",
	} {
		if !strings.Contains(stderr, w) {
			t.Errorf("stderr lacks %q:\n%s", w, stderr)
		}
	}
	if !strings.Contains(stdout, "group report: "+filepath.Join(out, "group-report.md")) {
		t.Errorf("stdout lacks the report path:\n%s", stdout)
	}
	rows := readCSV(t, filepath.Join(out, "group.csv"))
	// 2 contrasts × 6 regions × 3 terms, 13 subjects each (12 where 05 has no value).
	if len(rows) != 1+36 {
		t.Fatalf("group.csv has %d rows", len(rows)-1)
	}
	for _, r := range rows[1:] {
		n := "13"
		if r[0] == "glint" && r[1] == "spire" {
			n = "12"
		}
		if r[3] != n {
			t.Errorf("%v: n %s, want %s", r[:3], r[3], n)
		}
	}
	if rows[2][2] != "group:patient-control" || rows[3][2] != "covariate:age" {
		t.Errorf("terms %s, %s", rows[2][2], rows[3][2])
	}
	rep := readFile(t, filepath.Join(out, "group-report.md"))
	for _, want := range []string{report.Caution, report.PilotCaution, "03 (age), 08 (group)", "## Pilot power"} {
		if !strings.Contains(rep, want) {
			t.Errorf("group-report.md lacks %q", want)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "group.csv")); err == nil {
		t.Errorf("group.csv written into DIR despite -o")
	}
}

func pad2(i int) string {
	s := strconv.Itoa(i)
	if len(s) < 2 {
		s = "0" + s
	}
	return s
}

// TestGroupBadInput: each refusal names the file and what was expected, with
// exit 1 for bad input and 2 for bad usage; nothing is written.
func TestGroupBadInput(t *testing.T) {
	tmp := t.TempDir()
	three := filepath.Join(tmp, "three.tsv")
	writeFile(t, three, "participant_id\tarm\tscore\nsub-01\ta\t1\nsub-02\tb\t2\nsub-03\tc\thigh\n")
	noPSC := filepath.Join(tmp, "other", "betas.csv")
	writeFile(t, noPSC, "subject,region,contrast,estimate\n01,keel,faces,0.5\n02,keel,faces,0.7\n03,keel,faces,0.2\n")
	for _, c := range []struct {
		name   string
		args   []string
		status int
		frags  []string
	}{
		{"three levels", []string{"--participants", three, "--compare", "arm"}, 1,
			[]string{three, `3 level(s) among the subjects analysed: a, b, c (column "arm")`, "exactly two groups"}},
		{"covariate text", []string{"--participants", three, "--covariates", "score"}, 1,
			[]string{three + `:4:3: "high" is not a number (column "score")`}},
		{"absent column", []string{"--participants", three, "--covariates", "age"}, 1,
			[]string{three + `:1: no column "age"`}},
		{"no participants", []string{"--compare", "sex"}, 2, []string{"--participants FILE"}},
		{"unknown contrast", []string{"--contrast", "faces"}, 1,
			[]string{`no contrast "faces" (--contrast)`, "order, glint"}},
		{"bad measure", []string{"--measure", "beta"}, 2, []string{`--measure "beta"`}},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := groupFolder(t)
			code, _, stderr := runCLI(append([]string{"group", dir}, c.args...)...)
			if code != c.status {
				t.Errorf("exit %d, want %d; stderr %s", code, c.status, stderr)
			}
			for _, f := range c.frags {
				if !strings.Contains(stderr, f) {
					t.Errorf("stderr lacks %q:\n%s", f, stderr)
				}
			}
			if _, err := os.Stat(filepath.Join(dir, "group.csv")); err == nil {
				t.Errorf("group.csv written after a refusal")
			}
		})
	}
	code, _, stderr := runCLI("group", noPSC)
	if code != 1 || !strings.Contains(stderr, noPSC+`:1: no column "psc"`) || !strings.Contains(stderr, "--measure estimate") {
		t.Errorf("no psc column: exit %d, stderr %s", code, stderr)
	}
	code, _, stderr = runCLI("group", filepath.Join(tmp, "nothing-here"))
	if code != 1 || !strings.Contains(stderr, "nothing-here: no such file or folder") {
		t.Errorf("absent DIR: exit %d, stderr %s", code, stderr)
	}
	code, _, stderr = runCLI("group", noPSC, "--measure", "estimate", "--weighted")
	if code != 1 || !strings.Contains(stderr, `no column "std_error"`) {
		t.Errorf("weighted without std_error: exit %d, stderr %s", code, stderr)
	}
}

// TestGroupTableFromElsewhere: a subject table made by another tool, with
// only the required columns, analysed on its estimate column; -o writes
// beside it, never over it.
func TestGroupTableFromElsewhere(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "betas.csv")
	writeFile(t, in, "subject,region,contrast,estimate\n01,keel,faces,0.5\n02,keel,faces,0.7\n03,keel,faces,0.2\n01,loft,faces,-0.1\n02,loft,faces,0.1\n03,loft,faces,0\n04,loft,faces,0.3\n")
	_, stderr := mustRun(t, "group", in, "--measure", "estimate")
	// Subject 04 has no row for keel: listed like a missing value.
	if !strings.Contains(stderr, "warning: contrast faces, region keel: no estimate for subject 04; left out of this region") {
		t.Errorf("stderr does not list the subject without a row:\n%s", stderr)
	}
	rows := readCSV(t, filepath.Join(dir, "group.csv"))
	// keel: mean 0.4666..., sd 0.2516..., t = mean / (sd/√3).
	if len(rows) != 3 || rows[1][1] != "keel" || rows[1][3] != "3" || rows[2][3] != "4" {
		t.Fatalf("group.csv %v", rows)
	}
	m := (0.5 + 0.7 + 0.2) / 3
	sd := math.Sqrt((math.Pow(0.5-m, 2) + math.Pow(0.7-m, 2) + math.Pow(0.2-m, 2)) / 2)
	if got := mustFloat(t, rows[1][6]); math.Abs(got-m/(sd/math.Sqrt(3))) > 1e-12 {
		t.Errorf("t = %g, want %g", got, m/(sd/math.Sqrt(3)))
	}
	parts := filepath.Join(dir, "power.csv")
	writeFile(t, parts, "subject,arm\n01,a\n02,b\n03,a\n")
	code, _, stderr2 := runCLI("group", in, "--measure", "estimate", "--participants", parts, "-o", dir)
	if code != 1 || !strings.Contains(stderr2, "would overwrite the input") {
		t.Errorf("output over an input: exit %d, stderr %s", code, stderr2)
	}
}

// TestGroupDemo: the demo runs the group level after its fit.
func TestGroupDemo(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "demo")
	stdout, _ := mustRun(t, "demo", "-o", dir)
	rep := filepath.Join(dir, "results", "group-report.md")
	if !strings.Contains(stdout, "group report: "+rep+"\n") {
		t.Errorf("demo stdout lacks the group report path:\n%s", stdout)
	}
	text := readFile(t, rep)
	for _, want := range []string{"not for clinical decisions", "### Contrast `viewing`", "## Pilot power", "plan with the lower end of the interval too"} {
		if !strings.Contains(text, want) {
			t.Errorf("%s lacks %q", rep, want)
		}
	}
}
