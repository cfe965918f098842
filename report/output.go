package report

import (
	"bufio"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sync"
	"sync/atomic"
)

// Output collects files written into one folder and publishes them together:
// each file goes to a hidden temporary name beside its final one, and
// Commit renames them all into place. Abort removes the temporaries.
// Create may be called from several goroutines at once (the tables are
// written concurrently), each writing its own files; Commit and Abort are
// called once those writers are done.
type Output struct {
	Dir     string
	mu      sync.Mutex // guards pending
	pending []*File
}

// File is one file being written.
type File struct {
	*bufio.Writer
	f         *os.File
	tmp, path string
}

// NewOutput makes the folder if needed.
func NewOutput(dir string) (*Output, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("cannot make output folder: %v", err)
	}
	return &Output{Dir: dir}, nil
}

// Create starts the file rel (slash-separated, relative to Dir).
func (o *Output) Create(rel string) (*File, error) {
	path := filepath.Join(o.Dir, filepath.FromSlash(rel))
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return nil, err
	}
	f, err := createTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-")
	if err != nil {
		return nil, err
	}
	file := &File{Writer: bufio.NewWriterSize(f, 1<<16), f: f, tmp: f.Name(), path: path}
	o.mu.Lock()
	o.pending = append(o.pending, file)
	o.mu.Unlock()
	return file, nil
}

// createTemp creates a new file dir/prefix+random for writing, with the
// permissions an ordinary file gets (0666 less the umask, usually 0644),
// which its rename into place keeps: os.CreateTemp makes 0600 files, which
// would leave results unreadable to the rest of a group sharing a project
// folder.
func createTemp(dir, prefix string) (*os.File, error) {
	for try := 0; ; try++ {
		name := filepath.Join(dir, fmt.Sprintf("%s%016x", prefix, rand.Uint64()))
		f, err := os.OpenFile(name, os.O_RDWR|os.O_CREATE|os.O_EXCL, 0o666)
		if os.IsExist(err) && try < 100 {
			continue
		}
		return f, err
	}
}

// ResultFiles are the names of every file a fit or group run writes into
// its folder (design tables aside, which live in design/).
func ResultFiles() []string {
	names := []string{"report.md", "provenance.json", "group-report.md"}
	for _, t := range allTables() {
		names = append(names, t.File)
	}
	return names
}

// allTables lists every table definition, first-level and group.
func allTables() []TableDef {
	return append(append([]TableDef(nil), Tables...), GroupTables...)
}

// ExistingResults returns the result files already in dir (design tables
// included), so a caller can refuse to overwrite them.
func ExistingResults(dir string) []string {
	var found []string
	for _, name := range ResultFiles() {
		if _, err := os.Stat(filepath.Join(dir, name)); err == nil {
			found = append(found, name)
		}
	}
	if m, _ := filepath.Glob(filepath.Join(dir, "design", "*.csv")); len(m) > 0 {
		found = append(found, "design/")
	}
	if m, _ := filepath.Glob(filepath.Join(dir, "figures", "*.png")); len(m) > 0 {
		found = append(found, "figures/")
	}
	return found
}

// CommitReplacing commits like Commit and then removes every result file of
// an earlier run that this one did not write (a stale responses.csv from an
// FIR fit, a design table or figure of a run no longer in the study, group
// results of the earlier fit), so the folder holds one run's results only.
func (o *Output) CommitReplacing() error {
	written := map[string]bool{}
	for _, p := range o.pending {
		written[p.path] = true
	}
	if err := o.Commit(); err != nil {
		return err
	}
	for _, name := range ResultFiles() {
		path := filepath.Join(o.Dir, name)
		if !written[path] {
			if err := os.Remove(path); err != nil && !os.IsNotExist(err) {
				return err
			}
		}
	}
	old, _ := filepath.Glob(filepath.Join(o.Dir, "design", "*.csv"))
	figs, _ := filepath.Glob(filepath.Join(o.Dir, "figures", "*.png"))
	for _, path := range append(old, figs...) {
		if !written[path] {
			if err := os.Remove(path); err != nil {
				return err
			}
		}
	}
	return nil
}

// commitWorkers is how many files Commit flushes and syncs at once: syncs
// wait on the disk, not the processor, and the file system can join
// concurrent syncs into fewer journal commits.
const commitWorkers = 8

// Commit flushes, syncs and closes every file (several at once), then,
// when all of them succeeded, renames them into place; on an error it
// removes every temporary and returns the first error in the order the
// files were created.
func (o *Output) Commit() error {
	errs := make([]error, len(o.pending))
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(commitWorkers, len(o.pending)) {
		wg.Go(func() {
			for {
				i := int(next.Add(1) - 1)
				if i >= len(o.pending) {
					return
				}
				errs[i] = o.pending[i].finish()
			}
		})
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			o.Abort()
			return err
		}
	}
	for _, p := range o.pending {
		if err := os.Rename(p.tmp, p.path); err != nil {
			o.Abort()
			return err
		}
	}
	o.pending = nil
	return nil
}

// finish flushes, syncs and closes the file.
func (p *File) finish() error {
	if err := p.Flush(); err != nil {
		return err
	}
	if err := p.f.Sync(); err != nil {
		return err
	}
	return p.f.Close()
}

// Abort removes every file not yet committed.
func (o *Output) Abort() {
	for _, p := range o.pending {
		p.f.Close()
		os.Remove(p.tmp)
	}
	o.pending = nil
}
