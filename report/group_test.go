package report

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tessera-fmri/tessera/fit"
)

// TestGroupTablesMatchContract pins the columns of the group issue's
// tables (../shared/INTERFACE.md, "Added with the group issue").
func TestGroupTablesMatchContract(t *testing.T) {
	want := map[string]string{
		"group.csv": "contrast,region,term,n,estimate,std_error,statistic,df,p_value,q_value,p_holm,effect_size,effect_low,effect_high,tau2",
		"power.csv": "contrast,region,term,n,effect_size,n_for_80,n_for_90,detectable_effect",
	}
	for _, tab := range GroupTables {
		if got := strings.Join(tab.Header(), ","); got != want[tab.File] {
			t.Errorf("%s: %s\nwant %s", tab.File, got, want[tab.File])
		}
		delete(want, tab.File)
	}
	if len(want) > 0 {
		t.Errorf("tables missing from GroupTables: %v", want)
	}
}

// groupExample fits a small two-region, two-group example.
func groupExample(t *testing.T) *fit.GroupResult {
	t.Helper()
	subjects := []string{"a1", "a2", "a3", "b1", "b2", "b3"}
	spec := fit.GroupSpec{Compare: "arm", Levels: [2]string{"sham", "active"}, Subjects: map[string]fit.Subject{}}
	for i, s := range subjects {
		spec.Subjects[s] = fit.Subject{Group: i / 3}
	}
	samples := []fit.GroupSample{
		{Contrast: "faces", Region: "weak", Subjects: subjects, Y: []float64{0.1, -0.2, 0.15, 0.05, 0.0, 0.2}},
		{Contrast: "faces", Region: "strong", Subjects: subjects, Y: []float64{0.8, 1.1, 0.9, 1.6, 1.4, 1.9}},
	}
	res, err := fit.Group(samples, spec)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

func TestWriteGroupTables(t *testing.T) {
	res := groupExample(t)
	dir := t.TempDir()
	out, err := NewOutput(dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := WriteGroupTables(out, res); err != nil {
		t.Fatal(err)
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	g, _ := os.ReadFile(filepath.Join(dir, "group.csv"))
	p, _ := os.ReadFile(filepath.Join(dir, "power.csv"))
	gl := strings.Split(strings.TrimSpace(string(g)), "\n")
	pl := strings.Split(strings.TrimSpace(string(p)), "\n")
	if len(gl) != 5 || len(pl) != 5 {
		t.Fatalf("group.csv %d lines, power.csv %d lines; want 5 each", len(gl), len(pl))
	}
	if !strings.HasPrefix(gl[2], "faces,weak,arm:active-sham,6,") || !strings.HasSuffix(gl[2], ",") {
		t.Errorf("group.csv row %q: want the comparison term and an empty tau2", gl[2])
	}
	if !strings.HasPrefix(pl[3], "faces,strong,mean,6,") {
		t.Errorf("power.csv row %q", pl[3])
	}
}

func TestGroupMarkdown(t *testing.T) {
	res := groupExample(t)
	md := GroupMarkdown(res, GroupReportInfo{Input: "results/subject_contrasts.csv", Participants: "participants.tsv",
		Measure: "psc", Command: "tessera group results", Subjects: 6, Used: 6, Warnings: []string{"subject 9 not in the participants table"}})
	for _, want := range []string{Caution, PilotCaution, "Welch's t test of group active minus group sham",
		"Term `arm:active-sham`:", "## Warnings\n\n- subject 9 not in the participants table", "n for 80% at the cautious end"} {
		if !strings.Contains(md, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	// Ranked by p: the strong region first in every term.
	i, j := strings.Index(md, "| strong | 6 |"), strings.Index(md, "| weak | 6 |")
	if i < 0 || j < 0 || i > j {
		t.Errorf("strong region not ranked first:\n%s", md)
	}
	for _, r := range res.Rows {
		if r.Power != nil && math.IsNaN(r.Power.Detectable) {
			t.Errorf("%s %s: no detectable effect", r.Region, r.Term)
		}
	}
}
