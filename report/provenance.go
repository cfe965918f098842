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
	// Shard is set by fit --shard: which part of the study this folder
	// holds, and the study's full run and subject order, which merge needs.
	Shard *ShardInfo `json:"shard,omitempty"`
	// Merged lists, in a merged folder, the shard folders it was made from.
	Merged []string `json:"merged_from,omitempty"`
}

// RunKey identifies a run.
type RunKey struct {
	Subject string `json:"subject"`
	Session string `json:"session"`
	Run     string `json:"run"`
}

// ShardInfo describes one shard of a sharded fit.
type ShardInfo struct {
	Index    int      `json:"index"`
	Count    int      `json:"count"`
	Runs     []RunKey `json:"study_runs"`
	Subjects []string `json:"study_subjects"`
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
