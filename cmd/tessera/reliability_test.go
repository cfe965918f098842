package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestOverwriteRefused: a folder holding results is refused unless
// --overwrite; with it, results of the earlier fit that this one does not
// write (responses.csv of an FIR fit) are removed.
func TestOverwriteRefused(t *testing.T) {
	study := simulateStudy(t, 1, 1, 3, 120, 9)
	out := filepath.Join(t.TempDir(), "res")
	mustRun(t, "fit", study, "-o", out, "--hrf", "fir", "--fir-window", "24", "--fir-bins", "12")
	before := readFile(t, filepath.Join(out, "estimates.csv"))
	code, _, stderr := runCLI("fit", study, "-o", out)
	if code != 1 || !strings.Contains(stderr, "already holds results") || !strings.Contains(stderr, "--overwrite") {
		t.Fatalf("second fit: exit %d, stderr %q", code, stderr)
	}
	if readFile(t, filepath.Join(out, "estimates.csv")) != before {
		t.Fatal("the refused fit changed estimates.csv")
	}
	mustRun(t, "fit", study, "-o", out, "--overwrite")
	if _, err := os.Stat(filepath.Join(out, "responses.csv")); !os.IsNotExist(err) {
		t.Errorf("responses.csv of the earlier FIR fit is still there: %v", err)
	}
	if readFile(t, filepath.Join(out, "estimates.csv")) == before {
		t.Error("--overwrite did not replace estimates.csv")
	}
}

// TestInterrupt sends SIGINT, then SIGTERM, to a fit in progress (the test
// hook pauses after each run): exit 130, a message saying how many runs were
// fitted, and no table in the output folder.
func TestInterrupt(t *testing.T) {
	study := simulateStudy(t, 6, 2, 3, 100, 4)
	for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
		out := filepath.Join(t.TempDir(), "res")
		cmd := exec.Command(binary, "fit", study, "-o", out, "--jobs", "1")
		cmd.Env = append(os.Environ(), testRunDelayEnv+"=300")
		var errb strings.Builder
		cmd.Stderr = &errb
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		time.Sleep(700 * time.Millisecond)
		if err := cmd.Process.Signal(sig); err != nil {
			t.Fatal(err)
		}
		err := cmd.Wait()
		ee, ok := err.(*exec.ExitError)
		if !ok || ee.ExitCode() != exitInterrupted {
			t.Fatalf("%v: %v (stderr %q), want exit %d", sig, err, errb.String(), exitInterrupted)
		}
		if !strings.Contains(errb.String(), "interrupted after fitting") || !strings.Contains(errb.String(), "of 12 runs") {
			t.Errorf("%v: stderr %q does not say what was completed", sig, errb.String())
		}
		if files := listFiles(t, out); len(files) > 0 {
			t.Errorf("%v: files left after the interrupt: %v", sig, sortedKeys(files))
		}
	}
}

// TestAcceptedOddities: inputs that are unusual but valid give exactly the
// results of the clean study: a byte-order mark with CRLF line ends, quoted
// header names.
func TestAcceptedOddities(t *testing.T) {
	study := simulateStudy(t, 1, 1, 3, 100, 6)
	clean := filepath.Join(t.TempDir(), "clean")
	mustRun(t, "fit", study, "-o", clean)
	want := readFile(t, filepath.Join(clean, "estimates.csv"))
	sig := filepath.Join(filepath.Dir(study), "sub-01", "sub-01_run-1_signals.csv")
	orig := readFile(t, sig)
	for name, text := range map[string]string{
		"bom-crlf":      "\ufeff" + strings.ReplaceAll(orig, "\n", "\r\n"),
		"quoted-header": quoteHeader(orig),
	} {
		writeFile(t, sig, text)
		out := filepath.Join(t.TempDir(), name)
		mustRun(t, "fit", study, "-o", out)
		if got := readFile(t, filepath.Join(out, "estimates.csv")); got != want {
			t.Errorf("%s: estimates.csv differs from the clean file's", name)
		}
	}
	writeFile(t, sig, orig)
}

func quoteHeader(text string) string {
	head, rest, _ := strings.Cut(text, "\n")
	cells := strings.Split(head, ",")
	for i, c := range cells {
		cells[i] = `"` + c + `"`
	}
	return strings.Join(cells, ",") + "\n" + rest
}

// TestMissingCensor: a NaN cell is an error naming the cell, or with
// --missing censor that volume is censored for every region (counted in
// diagnostics, a censor term in the design).
func TestMissingCensor(t *testing.T) {
	study := simulateStudy(t, 1, 1, 3, 100, 8)
	sig := filepath.Join(filepath.Dir(study), "sub-01", "sub-01_run-1_signals.csv")
	lines := strings.Split(readFile(t, sig), "\n")
	cells := strings.Split(lines[11], ",")
	cells[1] = "NaN"
	lines[11] = strings.Join(cells, ",")
	writeFile(t, sig, strings.Join(lines, "\n"))
	code, _, stderr := runCLI("fit", study, "-o", filepath.Join(t.TempDir(), "err"))
	if code != 1 || !strings.Contains(stderr, "sub-01_run-1_signals.csv:12:2") {
		t.Fatalf("exit %d, stderr %q; want exit 1 naming line 12, cell 2", code, stderr)
	}
	out := filepath.Join(t.TempDir(), "res")
	_, stderr = mustRun(t, "fit", study, "-o", out, "--missing", "censor")
	if !strings.Contains(stderr, "volumes 10 have missing") {
		t.Errorf("no warning naming the censored volume: %q", stderr)
	}
	design := readCSV(t, filepath.Join(out, "design", "01_1.csv"))
	if !strings.Contains(strings.Join(design[0], ","), "censor:10") {
		t.Errorf("design lacks censor:10: %v", design[0])
	}
	diag := readCSV(t, filepath.Join(out, "diagnostics.csv"))
	for _, r := range diag[1:] {
		if r[5] != "1" {
			t.Errorf("region %s: censored %s, want 1", r[3], r[5])
		}
	}
}

// TestStreamedRunsSameTables: with runs released after planning and read
// again when fitted (the path large studies take), every table is the same
// as when the study is held in memory.
func TestStreamedRunsSameTables(t *testing.T) {
	study := simulateStudy(t, 2, 2, 4, 100, 21)
	held := filepath.Join(t.TempDir(), "held")
	mustRun(t, "fit", study, "-o", held, "--censor-fd", "0.2")
	old := streamBytes
	streamBytes = 0
	defer func() { streamBytes = old }()
	streamed := filepath.Join(t.TempDir(), "streamed")
	mustRun(t, "fit", study, "-o", streamed, "--censor-fd", "0.2")
	want := listFiles(t, held)
	got := listFiles(t, streamed)
	for name, text := range want {
		if strings.HasSuffix(name, ".csv") && got[name] != text {
			t.Errorf("%s differs when runs are streamed", name)
		}
	}
}
