package main

import (
	"image/png"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"testing"
)

var reportImage = regexp.MustCompile(`!\[[^\]]*\]\(([^)]+)\)`)

// figureLinks returns the image links of a report.md and checks that each
// resolves to a PNG that decodes.
func figureLinks(t *testing.T, dir string) []string {
	t.Helper()
	var links []string
	for _, m := range reportImage.FindAllStringSubmatch(readFile(t, filepath.Join(dir, "report.md")), -1) {
		links = append(links, m[1])
		f, err := os.Open(filepath.Join(dir, filepath.FromSlash(m[1])))
		if err != nil {
			t.Errorf("report.md links %s: %v", m[1], err)
			continue
		}
		if _, err := png.DecodeConfig(f); err != nil {
			t.Errorf("%s: %v", m[1], err)
		}
		f.Close()
	}
	sort.Strings(links)
	return links
}

// pngFiles lists figures/*.png of an output folder, relative.
func pngFiles(t *testing.T, dir string) []string {
	t.Helper()
	var out []string
	for name := range listFiles(t, filepath.Join(dir, "figures")) {
		out = append(out, "figures/"+name)
	}
	sort.Strings(out)
	return out
}

// TestFitFigures: tessera fit writes figures/ with exactly the files that
// report.md links, and a refit with --overwrite removes the figures of
// runs no longer in the study.
func TestFitFigures(t *testing.T) {
	out := filepath.Join(t.TempDir(), "res")
	mustRun(t, "fit", simulateStudy(t, 2, 2, 5, 100, 21), "-o", out, "--censor-fd", "0.3")
	links := figureLinks(t, out)
	files := pngFiles(t, out)
	if strings.Join(links, " ") != strings.Join(files, " ") {
		t.Fatalf("report.md links\n %q\nfigures/ holds\n %q", links, files)
	}
	for _, want := range []string{"figures/design_02_2.png", "figures/displacement_01_1.png"} {
		if !strings.Contains(strings.Join(files, " "), want) {
			t.Errorf("no %s among %q", want, files)
		}
	}
	for _, kind := range []string{"timecourse_", "autocorrelation_"} {
		if !strings.Contains(strings.Join(files, " "), "figures/"+kind) {
			t.Errorf("no %s figure among %q", kind, files)
		}
	}
	if !strings.Contains(readFile(t, filepath.Join(out, "report.md")), "- `figures/`\n") {
		t.Error("report.md's file list lacks figures/")
	}

	// Refit a one-subject study into the same folder.
	mustRun(t, "fit", simulateStudy(t, 1, 1, 5, 100, 22), "-o", out, "--overwrite")
	links, files = figureLinks(t, out), pngFiles(t, out)
	if strings.Join(links, " ") != strings.Join(files, " ") {
		t.Errorf("after --overwrite, report.md links\n %q\nfigures/ holds\n %q", links, files)
	}
	for _, f := range files {
		if strings.Contains(f, "_02_") || strings.Contains(f, "_01_2") {
			t.Errorf("stale %s after --overwrite with one subject and run", f)
		}
	}
}

// TestGroupFigures: tessera group draws one effects figure per contrast and
// term, each a decodable PNG that group-report.md links.
func TestGroupFigures(t *testing.T) {
	study := simulateStudy(t, 4, 1, 5, 100, 31)
	out := filepath.Join(t.TempDir(), "res")
	mustRun(t, "fit", study, "-o", out)
	mustRun(t, "group", out)
	rep := readFile(t, filepath.Join(out, "group-report.md"))
	re := regexp.MustCompile(`!\[[^\]]*\]\((figures/group_[^)]+\.png)\)`)
	links := re.FindAllStringSubmatch(rep, -1)
	if len(links) != 2 { // one per condition contrast: jumbled, ordered
		t.Fatalf("group-report.md links %d group figures, want 2", len(links))
	}
	for _, l := range links {
		f, err := os.Open(filepath.Join(out, l[1]))
		if err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(f)
		f.Close()
		if err != nil {
			t.Fatalf("%s: %v", l[1], err)
		}
		if b := img.Bounds(); b.Dx() < 400 || b.Dy() < 300 {
			t.Errorf("%s is %v", l[1], b)
		}
	}
}

// TestLongNamesFigureFiles: a region named with 300 characters fits, its
// figures' file names cut to fit the file system's limit (255 bytes), its
// tables holding the whole name. Before, the fit stopped at the figures with
// "file name too long" and wrote no table. (Found by an adversarial sweep.)
func TestLongNamesFigureFiles(t *testing.T) {
	study := simulateStudy(t, 1, 1, 2, 80, 4)
	sig := filepath.Join(filepath.Dir(study), "sub-01", "sub-01_run-1_signals.csv")
	b, err := os.ReadFile(sig)
	if err != nil {
		t.Fatal(err)
	}
	long := strings.Repeat("r", 300)
	lines := strings.SplitN(string(b), "\n", 2)
	cols := strings.Split(lines[0], ",")
	cols[0] = long
	if err := os.WriteFile(sig, []byte(strings.Join(cols, ",")+"\n"+lines[1]), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "out")
	mustRun(t, "fit", study, "-o", out)
	figs, err := os.ReadDir(filepath.Join(out, "figures"))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range figs {
		if len(f.Name()) > 255 {
			t.Errorf("figure file name of %d bytes", len(f.Name()))
		}
	}
	if d, err := os.ReadFile(filepath.Join(out, "diagnostics.csv")); err != nil || !strings.Contains(string(d), long) {
		t.Errorf("diagnostics.csv lacks the full region name (%v)", err)
	}
}
