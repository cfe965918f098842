package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"fmt"
	"io/fs"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"
)

// runCLI runs one command line through run and returns the exit status and
// what was written to stdout and stderr.
func runCLI(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(args, &out, &errb)
	return code, out.String(), errb.String()
}

// mustRun runs a command line that must succeed.
func mustRun(t *testing.T, args ...string) (stdout, stderr string) {
	t.Helper()
	code, stdout, stderr := runCLI(args...)
	if code != 0 {
		t.Fatalf("tessera %s: exit %d; stderr:\n%s", strings.Join(args, " "), code, stderr)
	}
	return stdout, stderr
}

// simulateStudy writes a simulated study into a new temporary folder and
// returns the study table's path.
func simulateStudy(t *testing.T, subjects, runs, regions, volumes int, seed int) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "sim")
	mustRun(t, "simulate", "-o", dir, "--subjects", strconv.Itoa(subjects), "--runs", strconv.Itoa(runs),
		"--regions", strconv.Itoa(regions), "--volumes", strconv.Itoa(volumes), "--tr", "2", "--seed", strconv.Itoa(seed))
	return filepath.Join(dir, "study.csv")
}

// readCSV reads a comma-separated file as it is, rows of any length.
func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	rows, err := r.ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	if len(rows) == 0 {
		t.Fatalf("%s: empty", path)
	}
	return rows
}

// studyRun is one row of a study table as the tests need it.
type studyRun struct {
	subject, run               string
	tr                         string
	signals, events, confounds string // absolute or relative to the working folder
}

func (r studyRun) key() string { return r.subject + "_" + r.run }

// readStudy reads a study table written by simulate (no sessions).
func readStudy(t *testing.T, path string) []studyRun {
	t.Helper()
	rows := readCSV(t, path)
	col := map[string]int{}
	for j, n := range rows[0] {
		col[n] = j
	}
	for _, n := range []string{"subject", "run", "tr", "signals", "events", "confounds"} {
		if _, ok := col[n]; !ok {
			t.Fatalf("%s: no column %q in %q", path, n, rows[0])
		}
	}
	dir := filepath.Dir(path)
	var out []studyRun
	for _, r := range rows[1:] {
		out = append(out, studyRun{subject: r[col["subject"]], run: r[col["run"]], tr: r[col["tr"]],
			signals: filepath.Join(dir, r[col["signals"]]), events: filepath.Join(dir, r[col["events"]]),
			confounds: filepath.Join(dir, r[col["confounds"]])})
	}
	return out
}

func writeFile(t *testing.T, path, text string) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
}

func readFile(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func sha256File(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}

// noiseSignals writes a signals table of white noise about a baseline, one
// column per region.
func noiseSignals(regions []string, volumes int, seed uint64) string {
	r := rand.New(rand.NewPCG(seed, 7))
	var b strings.Builder
	b.WriteString(strings.Join(regions, ",") + "\n")
	for t := 0; t < volumes; t++ {
		for j := range regions {
			if j > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, "%.4f", 900+50*float64(j)+3*r.NormFloat64())
		}
		b.WriteByte('\n')
	}
	return b.String()
}

// listFiles returns every regular file under dir (relative, slash-separated)
// with its content; a missing dir has none.
func listFiles(t *testing.T, dir string) map[string]string {
	t.Helper()
	files := map[string]string{}
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if os.IsNotExist(err) && p == dir {
				return filepath.SkipDir
			}
			return err
		}
		if d.IsDir() {
			return nil
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(dir, p)
		files[filepath.ToSlash(rel)] = string(b)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return files
}

func sortedKeys[V any](m map[string]V) []string {
	k := make([]string, 0, len(m))
	for x := range m {
		k = append(k, x)
	}
	sort.Strings(k)
	return k
}

// parseNumber reads a numeric cell of an output table: a finite float64.
func parseNumber(s string) (float64, bool) {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false
	}
	return v, true
}
