package main

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestShardsMergeEqualSingleRun: a study fitted in three shards and merged
// gives every table of the unsharded fit byte for byte (design tables
// included), q values and relative efficiencies recomputed across shards.
func TestShardsMergeEqualSingleRun(t *testing.T) {
	study := simulateStudy(t, 5, 2, 6, 120, 12)
	tmp := t.TempDir()
	single := filepath.Join(tmp, "single")
	flags := []string{"--contrast", "d = ordered - jumbled", "--censor-fd", "0.2", "--hrf-derivatives", "time"}
	mustRun(t, append([]string{"fit", study, "-o", single}, flags...)...)
	var parts []string
	for _, s := range []string{"1/3", "2/3", "3/3"} {
		dir := filepath.Join(tmp, "part"+s[:1])
		mustRun(t, append([]string{"fit", study, "-o", dir, "--shard", s}, flags...)...)
		parts = append(parts, dir)
	}
	merged := filepath.Join(tmp, "merged")
	mustRun(t, append(append([]string{"merge"}, parts...), "-o", merged)...)
	want := listFiles(t, single)
	got := listFiles(t, merged)
	compared := 0
	for name, text := range want {
		if !strings.HasSuffix(name, ".csv") {
			continue
		}
		if got[name] != text {
			t.Errorf("%s differs between the merged shards and the single fit", name)
		}
		compared++
	}
	for name := range got {
		if _, ok := want[name]; !ok && strings.HasSuffix(name, ".csv") {
			t.Errorf("merge wrote %s, which the single fit does not", name)
		}
	}
	if compared < 10 {
		t.Fatalf("compared %d tables", compared)
	}
	// Shards are disjoint: each subject's rows come from one shard only.
	if code, _, stderr := runCLI("merge", parts[0], parts[1], "-o", filepath.Join(tmp, "m2")); code != 1 || !strings.Contains(stderr, "shards 3 of 3 are missing") {
		t.Errorf("merging two of three shards: exit %d, %q", code, stderr)
	}
}

// TestShardWithoutACondition: subject 02 has no "jumbled" events, and a
// contrast and an F test name it. The unsharded fit accepts them (they are
// not estimated in 02's runs); the shard of subject 02 alone must accept
// them too, checking names against the whole study's conditions, and the
// merged shards must equal the single fit. (Found by an adversarial sweep:
// the shard refused the contrast as naming no condition of the study.)
func TestShardWithoutACondition(t *testing.T) {
	study := simulateStudy(t, 2, 1, 3, 120, 5)
	events := filepath.Join(filepath.Dir(study), "sub-02", "sub-02_run-1_events.tsv")
	data, err := os.ReadFile(events)
	if err != nil {
		t.Fatal(err)
	}
	var kept []string
	for i, line := range strings.Split(strings.TrimRight(string(data), "\n"), "\n") {
		if i == 0 || !strings.Contains(line, "\tjumbled") {
			kept = append(kept, line)
		}
	}
	if err := os.WriteFile(events, []byte(strings.Join(kept, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	tmp := t.TempDir()
	flags := []string{"--contrast", "order = ordered - jumbled", "--ftest", "both = ordered; jumbled"}
	single := filepath.Join(tmp, "single")
	mustRun(t, append([]string{"fit", study, "-o", single}, flags...)...)
	var parts []string
	for _, s := range []string{"1/2", "2/2"} {
		dir := filepath.Join(tmp, "part"+s[:1])
		mustRun(t, append([]string{"fit", study, "-o", dir, "--shard", s}, flags...)...)
		parts = append(parts, dir)
	}
	merged := filepath.Join(tmp, "merged")
	mustRun(t, append(append([]string{"merge"}, parts...), "-o", merged)...)
	want, got := listFiles(t, single), listFiles(t, merged)
	for name, text := range want {
		if strings.HasSuffix(name, ".csv") && got[name] != text {
			t.Errorf("%s differs between the merged shards and the single fit", name)
		}
	}
	// A name that is no condition anywhere is still refused in a shard.
	code, _, stderr := runCLI("fit", study, "-o", filepath.Join(tmp, "bad"), "--shard", "2/2", "--contrast", "x = ordered - jumbeld")
	if code != 1 || !strings.Contains(stderr, `names "jumbeld", which is not a condition or term of this study`) {
		t.Errorf("misspelt condition in a shard: exit %d, %q", code, stderr)
	}
}

// TestMergeRefusesIncompleteShards: a shard folder that lacks a table, a
// design file, or a diagnostics row of a fitted region (a partial copy
// back from a cluster node) is refused, naming what is missing, instead of
// merging into tables that silently lack its subjects. (Found by an
// adversarial sweep.)
func TestMergeRefusesIncompleteShards(t *testing.T) {
	study := simulateStudy(t, 4, 1, 3, 80, 1)
	tmp := t.TempDir()
	fitShard := func(name, shard string) string {
		dir := filepath.Join(tmp, name)
		mustRun(t, "fit", study, "-o", dir, "--shard", shard)
		return dir
	}
	one := fitShard("one", "1/2")
	cases := []struct {
		name, want string
		damage     func(dir string) error
	}{
		{"no estimates", "lacks estimates.csv", func(d string) error { return os.Remove(filepath.Join(d, "estimates.csv")) }},
		{"no design file", "lacks design/02_1.csv", func(d string) error { return os.Remove(filepath.Join(d, "design", "02_1.csv")) }},
		{"a diagnostics row gone", "which estimates.csv holds", func(d string) error {
			p := filepath.Join(d, "diagnostics.csv")
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			lines := strings.SplitAfter(string(b), "\n")
			return os.WriteFile(p, []byte(strings.Join(append(lines[:2:2], lines[3:]...), "")), 0o644)
		}},
	}
	for _, c := range cases {
		two := fitShard("two-"+strings.ReplaceAll(c.name, " ", "-"), "2/2")
		if err := c.damage(two); err != nil {
			t.Fatal(err)
		}
		code, _, stderr := runCLI("merge", one, two, "-o", filepath.Join(tmp, "m-"+strings.ReplaceAll(c.name, " ", "-")))
		if code != 1 || !strings.Contains(stderr, c.want) {
			t.Errorf("%s: exit %d, %q", c.name, code, stderr)
		}
	}
}

// TestMergeInterrupted: a merge whose context is done (SIGINT or SIGTERM
// arrived) commits nothing and leaves no temporary file: exit 130, as fit.
// Before, SIGINT was ignored and SIGTERM left .NAME.csv.tmp-* files.
// (Found by an adversarial sweep.)
func TestMergeInterrupted(t *testing.T) {
	study := simulateStudy(t, 2, 1, 2, 60, 2)
	tmp := t.TempDir()
	var parts []string
	for _, s := range []string{"1/2", "2/2"} {
		dir := filepath.Join(tmp, "part"+s[:1])
		mustRun(t, "fit", study, "-o", dir, "--shard", s)
		parts = append(parts, dir)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	out := filepath.Join(tmp, "merged")
	var stdout, stderr strings.Builder
	if err := runMerge(ctx, append(parts, "-o", out), &stdout, &stderr); !errors.Is(err, errInterrupted) {
		t.Fatalf("error %v, want errInterrupted", err)
	}
	err := filepath.WalkDir(out, func(p string, d os.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			t.Errorf("left %s", p)
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}
