package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
)

// resultFiles are the files a fit writes (INTERFACE.md, Outputs); none may
// exist after a failed fit.
var resultFiles = []string{"estimates.csv", "contrasts.csv", "subject_contrasts.csv", "diagnostics.csv", "report.md", "provenance.json"}

// pathFlags take a path as their value.
var pathFlags = map[string]bool{"-o": true, "--output": true, "-s": true, "--signals": true,
	"-e": true, "--events": true, "-c": true, "--confounds-file": true}

// corpusCase is one folder of testdata/bad (see its README).
type corpusCase struct {
	name     string
	dir      string
	cmd      []string
	status   int
	frags    []string
	noOutput bool
}

func readCase(t *testing.T, dir string) corpusCase {
	t.Helper()
	c := corpusCase{name: filepath.Base(dir), dir: dir}
	for _, l := range strings.Split(readFile(t, filepath.Join(dir, "cmd")), "\n") {
		if l != "" {
			c.cmd = append(c.cmd, l)
		}
	}
	lines := strings.Split(readFile(t, filepath.Join(dir, "expect")), "\n")
	var err error
	if c.status, err = strconv.Atoi(strings.TrimSpace(lines[0])); err != nil {
		t.Fatalf("%s/expect: first line %q is not an exit status", dir, lines[0])
	}
	for _, l := range lines[1:] {
		if l != "" {
			c.frags = append(c.frags, l)
		}
	}
	if len(c.cmd) == 0 {
		t.Fatalf("%s/cmd: no arguments", dir)
	}
	_, err = os.Stat(filepath.Join(dir, "no-output-flag"))
	c.noOutput = err == nil
	return c
}

// prepare copies the case's inputs into a temporary folder and returns the
// command line with its paths rewritten into it, the copy's folder and the
// output folders the command may write to.
func (c corpusCase) prepare(t *testing.T) (args []string, work string, outs []string) {
	t.Helper()
	tmp := t.TempDir()
	work = filepath.Join(tmp, "case")
	for name, text := range listFiles(t, c.dir) {
		switch name {
		case "cmd", "expect", "no-output-flag":
			continue
		}
		writeFile(t, filepath.Join(work, filepath.FromSlash(name)), text)
	}
	hasOutput := false
	for i, a := range c.cmd {
		isPath := i > 0 && pathFlags[c.cmd[i-1]]
		if !isPath && !strings.HasPrefix(a, "-") {
			_, err := os.Stat(filepath.Join(work, a))
			isPath = err == nil
		}
		if isPath {
			a = filepath.Join(work, a)
		}
		if i > 0 && (c.cmd[i-1] == "-o" || c.cmd[i-1] == "--output") {
			hasOutput = true
			outs = append(outs, a)
		}
		args = append(args, a)
	}
	if args[0] == "fit" && !hasOutput && !c.noOutput {
		out := filepath.Join(tmp, "out")
		args = append(args, "-o", out)
		outs = append(outs, out)
	}
	if len(outs) == 0 {
		outs = append(outs, filepath.Join(tmp, "out")) // nothing may appear there either
	}
	return args, work, outs
}

// TestBadInputs runs every case of testdata/bad through the built binary: the exit status, every
// message fragment, and nothing written: no result table or temporary in
// the output folder, no input changed or added.
func TestBadInputs(t *testing.T) {
	dirs, err := filepath.Glob("../../testdata/bad/*/cmd")
	if err != nil {
		t.Fatal(err)
	}
	if len(dirs) < 20 {
		t.Fatalf("found %d cases in testdata/bad; expected at least 20", len(dirs))
	}
	for _, p := range dirs {
		c := readCase(t, filepath.Dir(p))
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			if c.status != 1 && c.status != 2 {
				t.Fatalf("expect gives exit status %d; the corpus holds failures only (1 or 2)", c.status)
			}
			if len(c.frags) == 0 {
				t.Fatalf("expect lists no message fragment")
			}
			args, work, outs := c.prepare(t)
			before := listFiles(t, work)
			code, stdout, stderr := runBinary(t, args...)
			if code != c.status {
				t.Errorf("exit status %d; want %d\nstderr:\n%s", code, c.status, stderr)
			}
			for _, f := range c.frags {
				if !strings.Contains(stderr, f) {
					t.Errorf("stderr lacks %q:\n%s", f, stderr)
				}
			}
			if strings.Contains(stdout, "report:") {
				t.Errorf("stdout announces a report after a failure:\n%s", stdout)
			}
			for _, out := range outs {
				for _, f := range resultFiles {
					if _, err := os.Stat(filepath.Join(out, f)); err == nil {
						t.Errorf("%s exists after a failed run", f)
					}
				}
				for name := range listFiles(t, out) {
					t.Errorf("file %s left in the output folder after a failed run", name)
				}
			}
			after := listFiles(t, work)
			for _, name := range sortedKeys(after) {
				if b, ok := before[name]; !ok {
					t.Errorf("%s was written into the input folder", name)
				} else if b != after[name] {
					t.Errorf("input %s was changed", name)
				}
			}
			for name := range before {
				if _, ok := after[name]; !ok {
					t.Errorf("input %s was removed", name)
				}
			}
		})
	}
}

// TestBadInputsControl fits the valid run every bad case starts from, so
// that each case fails because of its own defect.
func TestBadInputsControl(t *testing.T) {
	c := readCase(t, "../../testdata/cmd/valid-run")
	if c.status != 0 {
		t.Fatalf("the control expects exit %d", c.status)
	}
	args, _, outs := c.prepare(t)
	code, stdout, stderr := runCLI(args...)
	if code != 0 {
		t.Fatalf("exit %d; stderr:\n%s", code, stderr)
	}
	for _, f := range c.frags {
		if !strings.Contains(stdout, f) {
			t.Errorf("stdout lacks %q:\n%s", f, stdout)
		}
	}
	for _, f := range resultFiles {
		if _, err := os.Stat(filepath.Join(outs[0], f)); err != nil {
			t.Errorf("control: %v", err)
		}
	}
	if strings.Contains(stderr, "warning") {
		t.Errorf("the control run warns; it should be clean:\n%s", stderr)
	}
}

// TestEventsAfterRunEndDropped: an event that starts after the run's end
// is dropped with a warning that names its line, on stderr and in
// provenance.json; an event that starts before the end and runs past it is
// kept.
func TestEventsAfterRunEndDropped(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "study")
	writeFile(t, filepath.Join(dir, "study.csv"), "subject,run,tr,signals,events\nA,1,2,sig.csv,events.tsv\n")
	writeFile(t, filepath.Join(dir, "sig.csv"), noiseSignals([]string{"north", "south"}, 40, 11))
	// 40 volumes of 2 s: the run ends at 80 s. Line 4 starts after it; line
	// 5 starts before it and ends after it.
	writeFile(t, filepath.Join(dir, "events.tsv"), "onset\tduration\ttrial_type\n4\t6\ttap\n30\t6\ttap\n100\t4\ttap\n76\t10\ttap\n50\t6\ttap\n")
	out := filepath.Join(t.TempDir(), "out")
	_, stderr := mustRun(t, "fit", filepath.Join(dir, "study.csv"), "-o", out)
	const want = "events.tsv: line 4 has an onset at or after the end of the run at 80 s"
	if !strings.Contains(stderr, "warning: ") || !strings.Contains(stderr, want) {
		t.Errorf("stderr lacks the warning %q:\n%s", want, stderr)
	}
	var prov struct{ Warnings []string }
	readJSON(t, filepath.Join(out, "provenance.json"), &prov)
	found := false
	for _, w := range prov.Warnings {
		found = found || strings.Contains(w, want)
	}
	if !found {
		t.Errorf("provenance.json warnings %q lack %q", prov.Warnings, want)
	}
	if rep := readFile(t, filepath.Join(out, "report.md")); !strings.Contains(rep, "`tap` (4 events)") {
		t.Errorf("report.md does not count 4 tap events (5 in the file, 1 dropped)")
	}
}

// TestTROverrideEvents: --tr overrides the study table's tr (INTERFACE.md,
// Model flags) for everything, the end of the run included: with --tr 1 a
// run of 40 volumes ends at 40 s, so the event at 60 s is dropped with a
// warning, as it would be with tr 1 in the study table.
func TestTROverrideEvents(t *testing.T) {
	events := "onset\tduration\ttrial_type\n4\t2\ttap\n20\t2\ttap\n60\t2\ttap\n"
	const want = "events.tsv: line 4 has an onset at or after the end of the run at 40 s"
	for _, c := range []struct {
		name, tr string
		flags    []string
	}{
		{"tr 1 in the study table", "1", nil},
		{"tr 2 in the study table, --tr 1", "2", []string{"--tr", "1"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			dir := filepath.Join(t.TempDir(), "study")
			writeFile(t, filepath.Join(dir, "study.csv"), "subject,run,tr,signals,events\nA,1,"+c.tr+",sig.csv,events.tsv\n")
			writeFile(t, filepath.Join(dir, "sig.csv"), noiseSignals([]string{"north", "south"}, 40, 12))
			writeFile(t, filepath.Join(dir, "events.tsv"), events)
			out := filepath.Join(t.TempDir(), "out")
			_, stderr := mustRun(t, append([]string{"fit", filepath.Join(dir, "study.csv"), "-o", out}, c.flags...)...)
			if !strings.Contains(stderr, want) {
				t.Errorf("stderr lacks %q:\n%s", want, stderr)
			}
			if rep := readFile(t, filepath.Join(out, "report.md")); !strings.Contains(rep, "`tap` (2 events)") {
				t.Errorf("report.md does not count 2 tap events (3 in the file, 1 after the run's end)")
			}
		})
	}
}

// TestNoRunFittable: when censoring leaves every run with no more volumes
// than terms, the refusal says so per run, with the counts, and not with
// the runs' unrelated warnings.
func TestNoRunFittable(t *testing.T) {
	study := simulateStudy(t, 1, 1, 2, 40, 3)
	code, _, stderr := runCLI("fit", study, "-o", filepath.Join(t.TempDir(), "out"), "--censor-fd", "0.00001", "--noise", "none")
	if code != 1 || !strings.Contains(stderr, "no run can be fitted") ||
		!regexp.MustCompile(`run 01_1: 40 volumes, \d+ terms \(\d+ of them for censored volumes\)`).MatchString(stderr) {
		t.Errorf("exit %d, %q", code, stderr)
	}
}

// TestNonFiniteAndTinyFlags: number flags refuse NaN and infinities as
// usage errors (a range check such as x < 0 lets NaN through), and a TR or
// a high-pass period too short to sample is refused in words. Before,
// --slice-ref nan and --highpass 1e-300 panicked while the design was
// built, --censor-fd nan hung drawing the displacement figure, and
// simulate --tr 1e-300 panicked. (Found by an adversarial sweep.)
func TestNonFiniteAndTinyFlags(t *testing.T) {
	study := simulateStudy(t, 1, 1, 2, 60, 3)
	dir := filepath.Join(filepath.Dir(study), "sub-01")
	s, e, c := filepath.Join(dir, "sub-01_run-1_signals.csv"), filepath.Join(dir, "sub-01_run-1_events.tsv"), filepath.Join(dir, "sub-01_run-1_confounds.csv")
	for _, f := range [][]string{{"--slice-ref", "nan"}, {"--highpass", "NaN"}, {"--censor-fd", "nan"}, {"--tr", "inf"}, {"--fir-window", "-Inf"}, {"--vif-max", "nan"}} {
		args := append([]string{"fit", "-s", s, "-e", e, "-c", c, "--tr", "2", "-o", filepath.Join(t.TempDir(), "out")}, f...)
		if code, _, stderr := runCLI(args...); code != 2 || !strings.Contains(stderr, "--"+strings.TrimPrefix(f[0], "--")+" ") || !strings.Contains(stderr, "expected a finite number") {
			t.Errorf("%v: exit %d, %q", f, code, stderr)
		}
	}
	code, _, stderr := runCLI("fit", "-s", s, "-e", e, "--tr", "2", "-o", filepath.Join(t.TempDir(), "out"), "--highpass", "1e-300")
	if code != 1 || !strings.Contains(stderr, "--highpass 1e-300 s is shorter than two volumes") || strings.Contains(stderr, "events.tsv") {
		t.Errorf("--highpass 1e-300: exit %d, %q", code, stderr)
	}
	code, _, stderr = runCLI("fit", "-s", s, "-e", e, "--tr", "0.001", "-o", filepath.Join(t.TempDir(), "out"))
	if code != 2 || !strings.Contains(stderr, "--tr 0.001: expected seconds, at least 0.01") {
		t.Errorf("--tr 0.001: exit %d, %q", code, stderr)
	}
	code, _, stderr = runCLI("simulate", "-o", filepath.Join(t.TempDir(), "sim"), "--tr", "1e-300")
	if code != 2 || !strings.Contains(stderr, "--tr 1e-300: expected seconds from 0.01 to 20") {
		t.Errorf("simulate --tr 1e-300: exit %d, %q", code, stderr)
	}
}

// TestRegionWithoutValues: under --missing censor, a region with no value
// in any volume censors the whole run; the refusal names that region, not
// only the count of censored volumes. (Found by an adversarial sweep.)
func TestRegionWithoutValues(t *testing.T) {
	study := simulateStudy(t, 1, 1, 3, 60, 6)
	sig := filepath.Join(filepath.Dir(study), "sub-01", "sub-01_run-1_signals.csv")
	b, err := os.ReadFile(sig)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimRight(string(b), "\n"), "\n")
	for i := 1; i < len(lines); i++ {
		cells := strings.Split(lines[i], ",")
		cells[2] = "NA"
		lines[i] = strings.Join(cells, ",")
	}
	if err := os.WriteFile(sig, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	region := strings.Split(lines[0], ",")[2]
	code, _, stderr := runCLI("fit", study, "-o", filepath.Join(t.TempDir(), "out"), "--missing", "censor")
	if code != 1 || !strings.Contains(stderr, "as region "+region+" has no value in any volume") {
		t.Errorf("exit %d, %q", code, stderr)
	}
}
