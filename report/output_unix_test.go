//go:build unix

package report

import (
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// TestResultFileMode: result files get the mode of an ordinary new file,
// 0666 less the umask (0644 under umask 022), so that others in a group
// sharing a project folder can read them; os.CreateTemp's 0600 had been
// kept through the rename. (Found by an adversarial sweep.)
func TestResultFileMode(t *testing.T) {
	old := syscall.Umask(0o022)
	defer syscall.Umask(old)
	dir := t.TempDir()
	out, err := NewOutput(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"a.csv", "design/b.csv"} {
		f, err := out.Create(name)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := f.WriteString("x\n"); err != nil {
			t.Fatal(err)
		}
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	for _, name := range []string{"a.csv", "design/b.csv"} {
		st, err := os.Stat(filepath.Join(dir, filepath.FromSlash(name)))
		if err != nil {
			t.Fatal(err)
		}
		if got := st.Mode().Perm(); got != 0o644 {
			t.Errorf("%s: mode %o, want 644", name, got)
		}
	}
}
