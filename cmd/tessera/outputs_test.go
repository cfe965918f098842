package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	flag "github.com/spf13/pflag"
)

// The column lists of INTERFACE.md, "Outputs (-o DIR)", typed here from the
// contract (not taken from the report package) so that a change to either
// shows.
var (
	contractEstimates = []string{"subject", "session", "run", "region", "term", "estimate", "std_error",
		"statistic", "df", "p_value", "psc"}
	contractContrasts = []string{"subject", "session", "run", "region", "contrast", "estimate", "std_error",
		"statistic", "df", "p_value", "q_value", "psc"}
	contractSubjectContrasts = []string{"subject", "region", "contrast", "runs", "estimate", "std_error",
		"statistic", "df", "p_value", "q_value", "psc"}
	contractDiagnostics = []string{"subject", "session", "run", "region", "volumes", "censored", "df", "sigma",
		"r_squared", "noise", "ar_order", "ar_coefficients", "durbin_watson", "ljung_box_p", "normality_p", "tsnr",
		// Added at the end by the noise issue.
		"ma_coefficients", "white_share", "noise_scope", "noise_passes"}
)

// textColumns hold labels; every other column is numeric.
var textColumns = map[string]bool{"subject": true, "session": true, "run": true, "region": true,
	"term": true, "contrast": true, "noise": true, "ar_coefficients": true, "ma_coefficients": true, "noise_scope": true}

// intColumns hold counts.
var intColumns = map[string]bool{"df": true, "runs": true, "volumes": true, "censored": true, "ar_order": true, "noise_passes": true}

func readJSON(t *testing.T, path string, v any) {
	t.Helper()
	if err := json.Unmarshal([]byte(readFile(t, path)), v); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
}

// table is an output table read back: its rows as maps by column name.
type table struct {
	name string
	rows []map[string]string
}

// readTable reads an output CSV, checks its header against want and every
// row's length, that numbers parse back (or are empty: missing), and counts
// are integers.
func readTable(t *testing.T, path string, want []string) table {
	t.Helper()
	rows := readCSV(t, path)
	name := filepath.Base(path)
	if !slices.Equal(rows[0], want) {
		t.Fatalf("%s header\n %q\nwant (INTERFACE.md)\n %q", name, rows[0], want)
	}
	tab := table{name: name}
	for i, r := range rows[1:] {
		if len(r) != len(want) {
			t.Fatalf("%s row %d has %d cells; want %d", name, i+2, len(r), len(want))
		}
		m := map[string]string{}
		for j, c := range r {
			col := want[j]
			m[col] = c
			switch {
			case c == "" || textColumns[col]:
			case intColumns[col]:
				if _, err := strconv.Atoi(c); err != nil {
					t.Errorf("%s row %d column %s: %q is not an integer", name, i+2, col, c)
				}
			default:
				if _, ok := parseNumber(c); !ok {
					t.Errorf("%s row %d column %s: %q is not a finite number", name, i+2, col, c)
				}
			}
		}
		tab.rows = append(tab.rows, m)
	}
	return tab
}

func num(t *testing.T, tab table, i int, col string) float64 {
	t.Helper()
	v, ok := parseNumber(tab.rows[i][col])
	if !ok {
		t.Fatalf("%s row %d: %s is %q; want a number", tab.name, i+2, col, tab.rows[i][col])
	}
	return v
}

// checkInference checks what holds for every estimate-like row: se > 0,
// statistic = estimate/se, p in [0, 1], q in [p, 1].
func checkInference(t *testing.T, tab table, i int) {
	t.Helper()
	est, se, st := num(t, tab, i, "estimate"), num(t, tab, i, "std_error"), num(t, tab, i, "statistic")
	p := num(t, tab, i, "p_value")
	if se <= 0 {
		t.Errorf("%s row %d: std_error %g <= 0", tab.name, i+2, se)
	}
	if math.Abs(st-est/se) > 1e-9*math.Max(1, math.Abs(st)) {
		t.Errorf("%s row %d: statistic %g != estimate/std_error %g", tab.name, i+2, st, est/se)
	}
	if p < 0 || p > 1 {
		t.Errorf("%s row %d: p_value %g outside [0, 1]", tab.name, i+2, p)
	}
	if _, ok := tab.rows[i]["q_value"]; ok {
		if q := num(t, tab, i, "q_value"); q < p*(1-1e-12) || q > 1 {
			t.Errorf("%s row %d: q_value %g not in [p_value %g, 1]", tab.name, i+2, q, p)
		}
	}
}

// isCondition tells a condition term from drift, motion, confound and
// intercept terms (INTERFACE.md, Model definitions: term names).
func isCondition(term string) bool {
	return term != "intercept" && !strings.HasPrefix(term, "drift:") &&
		!strings.HasPrefix(term, "motion:") && !strings.HasPrefix(term, "confound:")
}

// addConstantRegion appends a region whose signal never changes.
func addConstantRegion(t *testing.T, path, name string) {
	t.Helper()
	lines := strings.Split(strings.TrimRight(readFile(t, path), "\n"), "\n")
	lines[0] += "," + name
	for i := 1; i < len(lines); i++ {
		lines[i] += ",750"
	}
	writeFile(t, path, strings.Join(lines, "\n")+"\n")
}

func TestFitOutputsContract(t *testing.T) {
	study := simulateStudy(t, 2, 2, 6, 120, 3)
	runs := readStudy(t, study)
	if len(runs) != 4 {
		t.Fatalf("simulate wrote %d runs; want 4", len(runs))
	}
	const flat = "flat_region"
	addConstantRegion(t, runs[0].signals, flat)
	out := filepath.Join(t.TempDir(), "results")
	stdout, stderr := mustRun(t, "fit", study, "-o", out)
	if !strings.Contains(stdout, "report: "+filepath.Join(out, "report.md")) {
		t.Errorf("stdout does not give the report's path:\n%s", stdout)
	}
	if !strings.Contains(stderr, flat) {
		t.Errorf("stderr does not warn about the constant region %s:\n%s", flat, stderr)
	}

	// Every file of the Outputs table.
	for _, f := range []string{"estimates.csv", "contrasts.csv", "subject_contrasts.csv", "diagnostics.csv", "report.md", "provenance.json"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("output: %v", err)
		}
	}
	for name := range listFiles(t, out) {
		if strings.HasPrefix(filepath.Base(name), ".") {
			t.Errorf("temporary file %s left in the output folder", name)
		}
	}

	// Design tables: term names, one row per volume, intercept last.
	designs := map[string][]string{} // run key -> terms
	for _, r := range runs {
		rows := readCSV(t, filepath.Join(out, "design", r.key()+".csv"))
		terms := rows[0]
		if len(terms) < 3 || terms[len(terms)-1] != "intercept" {
			t.Fatalf("design/%s.csv header %q: want condition terms first and intercept last", r.key(), terms)
		}
		if !isCondition(terms[0]) {
			t.Errorf("design/%s.csv: first term %q is not a condition", r.key(), terms[0])
		}
		if len(rows)-1 != 120 {
			t.Errorf("design/%s.csv has %d rows; want 120 (one per volume)", r.key(), len(rows)-1)
		}
		for i, row := range rows[1:] {
			if len(row) != len(terms) {
				t.Fatalf("design/%s.csv row %d has %d cells; want %d", r.key(), i+2, len(row), len(terms))
			}
			for j, c := range row {
				if _, ok := parseNumber(c); !ok {
					t.Fatalf("design/%s.csv row %d column %s: %q is not a number", r.key(), i+2, terms[j], c)
				}
			}
			if row[len(row)-1] != "1" {
				t.Errorf("design/%s.csv row %d: intercept %q; want 1", r.key(), i+2, row[len(row)-1])
			}
		}
		designs[r.key()] = terms
	}

	// estimates.csv: per run and region, the design's terms in order; df =
	// volumes - terms (the simulated designs have full rank); psc exactly for
	// condition terms.
	est := readTable(t, filepath.Join(out, "estimates.csv"), contractEstimates)
	terms := map[string][]string{} // run key + region -> terms in row order
	conditions := map[string]bool{}
	for i, r := range est.rows {
		if r["session"] != "" {
			t.Errorf("estimates.csv row %d: session %q; the study has none", i+2, r["session"])
		}
		k := r["subject"] + "_" + r["run"]
		terms[k+" "+r["region"]] = append(terms[k+" "+r["region"]], r["term"])
		checkInference(t, est, i)
		if want := strconv.Itoa(120 - len(designs[k])); r["df"] != want {
			t.Errorf("estimates.csv row %d: df %s; want %s (volumes - terms)", i+2, r["df"], want)
		}
		if cond := isCondition(r["term"]); cond != (r["psc"] != "") {
			t.Errorf("estimates.csv row %d: term %s has psc %q", i+2, r["term"], r["psc"])
		} else if cond {
			conditions[r["term"]] = true
		}
		if r["region"] == flat {
			t.Errorf("estimates.csv row %d: the constant region %s has estimates", i+2, flat)
		}
	}
	for _, r := range runs {
		for g := 1; g <= 6; g++ {
			region := "region_" + strconv.Itoa(1000 + g)[1:]
			if got := terms[r.key()+" "+region]; !slices.Equal(got, designs[r.key()]) {
				t.Errorf("estimates.csv run %s region %s: terms %q; want the design's %q", r.key(), region, got, designs[r.key()])
			}
		}
	}
	if len(est.rows) != 4*6*len(designs[runs[0].key()]) {
		t.Errorf("estimates.csv has %d rows; want %d", len(est.rows), 4*6*len(designs[runs[0].key()]))
	}
	if len(conditions) != 2 {
		t.Errorf("conditions %v; want the simulation's two", conditions)
	}

	// contrasts.csv: by default one contrast per condition, named after it.
	con := readTable(t, filepath.Join(out, "contrasts.csv"), contractContrasts)
	if len(con.rows) != 4*6*2 {
		t.Errorf("contrasts.csv has %d rows; want %d (4 runs, 6 fitted regions, 2 contrasts)", len(con.rows), 4*6*2)
	}
	contrasts := map[string]bool{}
	for i, r := range con.rows {
		checkInference(t, con, i)
		contrasts[r["contrast"]] = true
		if !conditions[r["contrast"]] {
			t.Errorf("contrasts.csv row %d: contrast %q is not a condition (default contrasts)", i+2, r["contrast"])
		}
		if r["region"] == flat || r["psc"] == "" {
			t.Errorf("contrasts.csv row %d: region %s, psc %q", i+2, r["region"], r["psc"])
		}
	}

	sub := readTable(t, filepath.Join(out, "subject_contrasts.csv"), contractSubjectContrasts)
	if len(sub.rows) != 2*6*2 {
		t.Errorf("subject_contrasts.csv has %d rows; want %d (2 subjects, 6 regions, 2 contrasts)", len(sub.rows), 2*6*2)
	}
	for i, r := range sub.rows {
		checkInference(t, sub, i)
		if r["runs"] != "2" {
			t.Errorf("subject_contrasts.csv row %d: runs %s; want 2", i+2, r["runs"])
		}
		if want := strconv.Itoa(2 * (120 - len(designs[runs[0].key()]))); r["df"] != want {
			t.Errorf("subject_contrasts.csv row %d: df %s; want %s (the sum of the runs')", i+2, r["df"], want)
		}
		if r["region"] == flat {
			t.Errorf("subject_contrasts.csv row %d: the constant region", i+2)
		}
	}

	// diagnostics.csv: one row per run and region, the constant one skipped.
	diag := readTable(t, filepath.Join(out, "diagnostics.csv"), contractDiagnostics)
	if len(diag.rows) != 4*6+1 {
		t.Errorf("diagnostics.csv has %d rows; want %d", len(diag.rows), 4*6+1)
	}
	sawFlat := false
	for i, r := range diag.rows {
		k := r["subject"] + "_" + r["run"]
		if r["volumes"] != "120" {
			t.Errorf("diagnostics.csv row %d: volumes %s; want 120", i+2, r["volumes"])
		}
		if r["region"] == flat {
			sawFlat = true
			if k != runs[0].key() || !strings.HasPrefix(r["noise"], "skipped:") || r["df"] != "" {
				t.Errorf("diagnostics.csv row %d: constant region in run %s with noise %q, df %q; want run %s, noise skipped:..., df empty",
					i+2, k, r["noise"], r["df"], runs[0].key())
			}
			continue
		}
		// The default noise model is auto: the region's choice, its AR
		// order matching its coefficients, each inside (-1, 1).
		coefs := strings.Fields(r["ar_coefficients"])
		if !strings.HasPrefix(r["noise"], "auto:") || r["ar_order"] != strconv.Itoa(len(coefs)) || len(coefs) == 0 {
			t.Errorf("diagnostics.csv row %d: noise %q, ar_order %q, ar_coefficients %q; want auto:MODEL with matching order", i+2, r["noise"], r["ar_order"], r["ar_coefficients"])
		}
		for _, c := range coefs {
			if a, ok := parseNumber(c); !ok || math.Abs(a) >= 1 {
				t.Errorf("diagnostics.csv row %d: ar_coefficients %q; want coefficients inside (-1, 1)", i+2, r["ar_coefficients"])
			}
		}
		if want := strconv.Itoa(120 - len(designs[k])); r["df"] != want {
			t.Errorf("diagnostics.csv row %d: df %s; want %s", i+2, r["df"], want)
		}
		for _, c := range []string{"sigma", "r_squared", "durbin_watson", "ljung_box_p", "normality_p", "tsnr"} {
			v := num(t, diag, i, c)
			if (c == "r_squared" && v > 1) || (strings.HasSuffix(c, "_p") && (v < 0 || v > 1)) || v < 0 {
				t.Errorf("diagnostics.csv row %d: %s %g out of range", i+2, c, v)
			}
		}
	}
	if !sawFlat {
		t.Errorf("diagnostics.csv has no row for the constant region %s", flat)
	}

	// provenance.json.
	var prov struct {
		Program string
		Version string
		Command []string
		Options map[string]string
		Inputs  []struct {
			Path, SHA256 string
			Bytes        int64
		}
		Warnings []string
		Timings  map[string]float64 `json:"timings_seconds"`
	}
	readJSON(t, filepath.Join(out, "provenance.json"), &prov)
	var raw map[string]json.RawMessage
	readJSON(t, filepath.Join(out, "provenance.json"), &raw)
	for _, k := range []string{"program", "version", "command", "options", "inputs", "warnings", "timings_seconds"} {
		if _, ok := raw[k]; !ok {
			t.Errorf("provenance.json has no %q", k)
		}
	}
	if prov.Program != "tessera" || prov.Version == "" || len(prov.Command) == 0 {
		t.Errorf("provenance.json: program %q, version %q, command %q", prov.Program, prov.Version, prov.Command)
	}
	fs, _, _ := fitFlags()
	var missing []string
	fs.VisitAll(func(f *flag.Flag) {
		if _, ok := prov.Options[f.Name]; !ok {
			missing = append(missing, f.Name)
		}
	})
	if len(missing) > 0 {
		t.Errorf("provenance.json options lack %q", missing)
	}
	if prov.Options["output"] != out || prov.Options["noise"] != "auto" || prov.Options["highpass"] != "128" {
		t.Errorf("provenance.json options output %q, noise %q, highpass %q", prov.Options["output"], prov.Options["noise"], prov.Options["highpass"])
	}
	wantInputs := []string{study}
	for _, r := range runs {
		wantInputs = append(wantInputs, r.signals, r.events, r.confounds)
	}
	var gotInputs []string
	for _, in := range prov.Inputs {
		gotInputs = append(gotInputs, filepath.Clean(in.Path))
		if in.SHA256 != sha256File(t, in.Path) {
			t.Errorf("provenance.json: sha256 of %s is %s; the file's is %s", in.Path, in.SHA256, sha256File(t, in.Path))
		}
		if fi, err := os.Stat(in.Path); err != nil || fi.Size() != in.Bytes {
			t.Errorf("provenance.json: %s has %d bytes recorded", in.Path, in.Bytes)
		}
	}
	slices.Sort(wantInputs)
	slices.Sort(gotInputs)
	if !slices.Equal(gotInputs, wantInputs) {
		t.Errorf("provenance.json inputs\n %q\nwant\n %q", gotInputs, wantInputs)
	}
	if len(prov.Inputs) > 0 && (filepath.Clean(prov.Inputs[0].Path) != study || prov.Inputs[0].SHA256 != sha256File(t, study)) {
		t.Errorf("provenance.json: first input %+v; want the study table with sha256 %s", prov.Inputs[0], sha256File(t, study))
	}
	if !slices.ContainsFunc(prov.Warnings, func(w string) bool { return strings.Contains(w, flat) }) {
		t.Errorf("provenance.json warnings %q do not mention the constant region", prov.Warnings)
	}
	for _, k := range []string{"read", "fit", "write"} {
		if v, ok := prov.Timings[k]; !ok || v < 0 {
			t.Errorf("provenance.json timings_seconds[%q] = %v, %v", k, v, ok)
		}
	}

	// report.md: the caution, and a results table per contrast.
	rep := readFile(t, filepath.Join(out, "report.md"))
	if !strings.Contains(rep, "not for clinical decisions") {
		t.Errorf("report.md lacks the research-software caution")
	}
	for c := range contrasts {
		head := "### Contrast `" + c + "`"
		i := strings.Index(rep, head)
		if i < 0 {
			t.Errorf("report.md has no section %q", head)
			continue
		}
		section := rep[i+len(head):]
		if j := strings.Index(section, "\n#"); j >= 0 {
			section = section[:j]
		}
		if !strings.Contains(section, "| subject | region |") || !strings.Contains(section, "\n| "+runs[0].subject+" | region_") {
			t.Errorf("report.md section %q has no results table with subject rows:\n%s", head, section)
		}
	}
}

// TestSingleRunForm: fit -s -e -c --tr gives the same numbers as the study
// form on the same run.
func TestSingleRunForm(t *testing.T) {
	study := simulateStudy(t, 1, 1, 5, 100, 5)
	r := readStudy(t, study)[0]
	outStudy := filepath.Join(t.TempDir(), "study-form")
	outSingle := filepath.Join(t.TempDir(), "single-form")
	mustRun(t, "fit", study, "-o", outStudy)
	mustRun(t, "fit", "-s", r.signals, "-e", r.events, "-c", r.confounds, "--tr", r.tr, "-o", outSingle)
	for _, f := range []struct {
		file  string
		cols  []string
		first int // first column compared: subject (and session) aside
	}{
		{"estimates.csv", contractEstimates, 2},
		{"contrasts.csv", contractContrasts, 2},
		{"diagnostics.csv", contractDiagnostics, 2},
		{"subject_contrasts.csv", contractSubjectContrasts, 1},
	} {
		a := readTable(t, filepath.Join(outStudy, f.file), f.cols)
		b := readTable(t, filepath.Join(outSingle, f.file), f.cols)
		if len(a.rows) == 0 || len(a.rows) != len(b.rows) {
			t.Errorf("%s: %d rows in the study form, %d in the single-run form", f.file, len(a.rows), len(b.rows))
			continue
		}
		for i := range a.rows {
			for _, c := range f.cols[f.first:] {
				if c == "run" {
					continue
				}
				if a.rows[i][c] != b.rows[i][c] {
					t.Errorf("%s row %d %s: study form %q, single-run form %q", f.file, i+2, c, a.rows[i][c], b.rows[i][c])
				}
			}
		}
	}
}

// TestDeterministicJobs: the tables and the report do not depend on --jobs.
func TestDeterministicJobs(t *testing.T) {
	study := simulateStudy(t, 3, 2, 8, 120, 9)
	out1 := filepath.Join(t.TempDir(), "jobs1")
	out2 := filepath.Join(t.TempDir(), "jobs4")
	mustRun(t, "fit", study, "-o", out1, "--jobs", "1")
	mustRun(t, "fit", study, "-o", out2, "--jobs", "4")
	a, b := listFiles(t, out1), listFiles(t, out2)
	if !slices.Equal(sortedKeys(a), sortedKeys(b)) {
		t.Fatalf("files differ:\n %q\n %q", sortedKeys(a), sortedKeys(b))
	}
	compared := 0
	for _, name := range sortedKeys(a) {
		switch {
		case strings.HasSuffix(name, ".csv"), strings.HasSuffix(name, ".png"):
			compared++
			if a[name] != b[name] {
				t.Errorf("%s differs between --jobs 1 and --jobs 4", name)
			}
		case name == "report.md":
			compared++
			// The report quotes the command line, which differs in -o and
			// --jobs; every other line must be identical.
			la, lb := strings.Split(a[name], "\n"), strings.Split(b[name], "\n")
			if len(la) != len(lb) {
				t.Errorf("report.md: %d lines with --jobs 1, %d with --jobs 4", len(la), len(lb))
				continue
			}
			for i := range la {
				if la[i] == lb[i] {
					continue
				}
				if !strings.HasPrefix(la[i], "Command: ") || !strings.Contains(la[i], "--jobs 1") || !strings.Contains(lb[i], "--jobs 4") {
					t.Errorf("report.md line %d differs:\n %s\n %s", i+1, la[i], lb[i])
				}
			}
		}
	}
	if compared < 4+6+1 {
		t.Errorf("compared %d files; want the 4 tables, 6 design tables and report.md", compared)
	}
}

func TestHelp(t *testing.T) {
	for _, c := range commands {
		for _, args := range [][]string{{"help", c.name}, {c.name, "--help"}, {c.name, "-h"}} {
			code, stdout, stderr := runCLI(args...)
			if code != 0 {
				t.Errorf("tessera %s: exit %d; stderr %s", strings.Join(args, " "), code, stderr)
			}
			for _, want := range []string{"Usage: tessera " + c.name, "Example:\n  tessera "} {
				if !strings.Contains(stdout, want) {
					t.Errorf("tessera %s: stdout lacks %q:\n%s", strings.Join(args, " "), want, stdout)
				}
			}
		}
	}
	code, stdout, _ := runCLI("help")
	if code != 0 {
		t.Errorf("tessera help: exit %d", code)
	}
	for _, c := range []string{"demo", "simulate", "check", "fit"} {
		if !strings.Contains(stdout, "\n  "+c+" ") {
			t.Errorf("tessera help does not list %s:\n%s", c, stdout)
		}
	}
	for _, args := range [][]string{{"nosuch"}, {"help", "nosuch"}, {}} {
		code, _, stderr := runCLI(args...)
		if code != 2 {
			t.Errorf("tessera %s: exit %d; want 2", strings.Join(args, " "), code)
		}
		if len(args) > 0 && !strings.Contains(stderr, `no command "nosuch"`) {
			t.Errorf("tessera %s: stderr lacks the unknown command:\n%s", strings.Join(args, " "), stderr)
		}
	}
}

func TestDemo(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "demo")
	stdout, _ := mustRun(t, "demo", "-o", dir)
	report := filepath.Join(dir, "results", "report.md")
	if !strings.Contains(stdout, "report: "+report+"\n") {
		t.Errorf("stdout does not give the report path %s:\n%s", report, stdout)
	}
	if !strings.Contains(readFile(t, report), "not for clinical decisions") {
		t.Errorf("%s lacks the caution", report)
	}
	if _, err := os.Stat(filepath.Join(dir, "study", "study.csv")); err != nil {
		t.Errorf("demo study: %v", err)
	}
}

// TestProvenanceCommand: provenance.json records the command line that was
// run, as report.md does. (fit.go takes os.Args, which is the command line
// only when run is called from main.)
func TestProvenanceCommand(t *testing.T) {
	study := simulateStudy(t, 1, 1, 2, 60, 4)
	out := filepath.Join(t.TempDir(), "out")
	mustRun(t, "fit", study, "-o", out, "--noise", "none")
	var prov struct{ Command []string }
	readJSON(t, filepath.Join(out, "provenance.json"), &prov)
	want := []string{"fit", study, "-o", out, "--noise", "none"}
	if len(prov.Command) < len(want) || !slices.Equal(prov.Command[len(prov.Command)-len(want):], want) {
		t.Errorf("provenance.json command %q; want it to end with %q", prov.Command, want)
	}
	if rep := readFile(t, filepath.Join(out, "report.md")); !strings.Contains(rep, "Command: `tessera fit "+study+" -o "+out+" --noise none`") {
		t.Errorf("report.md does not quote the command line")
	}
}

// TestDemoKeepsOtherFolders: demo -o DIR replaces an earlier demo in DIR,
// but refuses a folder that holds anything else (a study of one's own and
// its results), which it would otherwise overwrite. (Found by an
// adversarial sweep.)
func TestDemoKeepsOtherFolders(t *testing.T) {
	mine := filepath.Join(t.TempDir(), "mine")
	if err := os.MkdirAll(filepath.Join(mine, "study"), 0o755); err != nil {
		t.Fatal(err)
	}
	own := filepath.Join(mine, "study", "study.csv")
	if err := os.WriteFile(own, []byte("subject,run,tr,signals\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCLI("demo", "-o", mine)
	if code != 1 || !strings.Contains(stderr, "is not a demo's folder") {
		t.Errorf("demo into a folder of one's own: exit %d, %q", code, stderr)
	}
	if b, err := os.ReadFile(own); err != nil || string(b) != "subject,run,tr,signals\n" {
		t.Errorf("the folder's own study table was changed: %q, %v", b, err)
	}
}
