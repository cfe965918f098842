package main

import (
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
