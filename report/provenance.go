package report

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"io"
	"os"
)

// Version is the program version written into provenance.json.
const Version = "0.1.0"

// InputFile is one input with its size and content hash.
type InputFile struct {
	Path   string `json:"path"`
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
}

// Provenance records how a result folder was made.
type Provenance struct {
	Program  string             `json:"program"`
	Version  string             `json:"version"`
	Command  []string           `json:"command"`
	Options  map[string]string  `json:"options"`
	Inputs   []InputFile        `json:"inputs"`
	Warnings []string           `json:"warnings"`
	Timings  map[string]float64 `json:"timings_seconds"`
}

// HashFile returns the size and SHA-256 of a file.
func HashFile(path string) (InputFile, error) {
	f, err := os.Open(path)
	if err != nil {
		return InputFile{}, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return InputFile{}, err
	}
	return InputFile{Path: path, Bytes: n, SHA256: hex.EncodeToString(h.Sum(nil))}, nil
}

// WriteProvenance writes provenance.json.
func WriteProvenance(out *Output, p *Provenance) error {
	f, err := out.Create("provenance.json")
	if err != nil {
		return err
	}
	if p.Warnings == nil {
		p.Warnings = []string{}
	}
	enc := json.NewEncoder(f)
	enc.SetIndent("", "  ")
	return enc.Encode(p)
}
