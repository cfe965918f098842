package report

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"
)

// Output collects files written into one folder and publishes them together:
// each file goes to a hidden temporary name beside its final one, and
// Commit renames them all into place. Abort removes the temporaries.
type Output struct {
	Dir     string
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
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return nil, err
	}
	file := &File{Writer: bufio.NewWriterSize(f, 1<<16), f: f, tmp: f.Name(), path: path}
	o.pending = append(o.pending, file)
	return file, nil
}

// Commit flushes, syncs and renames every file into place.
func (o *Output) Commit() error {
	for _, p := range o.pending {
		if err := p.Flush(); err != nil {
			o.Abort()
			return err
		}
		if err := p.f.Sync(); err != nil {
			o.Abort()
			return err
		}
		if err := p.f.Close(); err != nil {
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

// Abort removes every file not yet committed.
func (o *Output) Abort() {
	for _, p := range o.pending {
		p.f.Close()
		os.Remove(p.tmp)
	}
	o.pending = nil
}
