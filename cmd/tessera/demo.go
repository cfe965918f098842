package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/simulate"
)

var demoCommand = &command{
	name:    "demo",
	args:    "[-o DIR]",
	summary: "write the invented demo study, analyse it, print the top findings and the report's path",
	example: `tessera demo
tessera demo -o /tmp/tessera-demo`,
	flags: func() *flag.FlagSet { fs, _ := demoFlags(); return fs },
}

func init() { demoCommand.runCtx = runDemo }

func demoFlags() (*flag.FlagSet, *string) {
	fs := flag.NewFlagSet("demo", flag.ContinueOnError)
	out := fs.StringP("output", "o", "tessera-demo", "folder for the demo study and its results")
	return fs, out
}

// The demo study is an invented scenario of the project's own, the "mosaic
// study": people look at tile mosaics that are either ordered (a regular
// tiling) or jumbled (the same tiles shuffled), and press a key when a tile
// glints. Region names are invented landmarks, not atlas labels.
var (
	demoConditions = []string{"ordered", "jumbled", "glint"}
	demoRegions    = []string{
		"lantern_left", "lantern_right", "orchard_left", "orchard_right",
		"keel", "spire", "brook_left", "brook_right",
		"anvil", "quarry_left", "quarry_right", "loft",
	}
	// Planted group-level percent signal changes (ordered, jumbled, glint).
	demoEffects = map[string][]float64{
		"lantern_left":  {0.9, 0.5, 0.3},
		"lantern_right": {0.8, 0.45, 0.3},
		"orchard_left":  {0.5, 0.5, 0.2},
		"orchard_right": {0.45, 0.5, 0.2},
		"keel":          {0, 0, 0.7},
		"spire":         {0.3, 0.6, 0},
	}
	demoContrasts = []string{"order = ordered - jumbled", "viewing = 0.5*ordered + 0.5*jumbled", "glint"}
)

// demoMarker is the file that marks a folder as the demo's own.
const demoMarker = ".tessera-demo"

func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs, out := demoFlags()
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("unexpected arguments: %v", fs.Args())
	}
	studyDir := filepath.Join(*out, "study")
	resultsDir := filepath.Join(*out, "results")
	// The demo replaces an earlier demo in its folder, and nothing else: a
	// folder that holds other files (a study of one's own, its results) is
	// refused. A demo folder is known by its marker file.
	if entries, err := os.ReadDir(*out); err == nil && len(entries) > 0 {
		if _, err := os.Stat(filepath.Join(*out, demoMarker)); err != nil {
			return fmt.Errorf("-o %s already holds files and is not a demo's folder (no %s in it); the demo writes study/ and results/ there, replacing what they hold: choose a new or empty folder", *out, demoMarker)
		}
	}
	if err := os.MkdirAll(*out, 0o755); err != nil {
		return fmt.Errorf("cannot make the demo folder: %v", err)
	}
	if err := os.WriteFile(filepath.Join(*out, demoMarker), []byte("This folder holds tessera's demo; `tessera demo -o` replaces it.\n"), 0o666); err != nil {
		return fmt.Errorf("cannot write the demo folder's marker: %v", err)
	}
	st, err := simulate.Generate(simulate.Options{
		Subjects: 6, Runs: 2, Volumes: 240, TR: 1.5, Design: "event",
		WhiteShare: 0.5, Seed: 2026, Conditions: demoConditions,
		RegionNames: demoRegions, Effects: demoEffects,
	})
	if err != nil {
		return err
	}
	if err := st.Write(studyDir); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "demo: the mosaic study (invented): %d subjects, %d runs, %d regions, conditions %v\n",
		6, len(st.Runs), len(demoRegions), demoConditions)
	fmt.Fprintf(stdout, "study written to %s (planted effects in truth.csv)\n", studyDir)
	// The demo's folder is its own: a new demo replaces the previous one.
	fitArgs := []string{filepath.Join(studyDir, "study.csv"), "-o", resultsDir, "--overwrite"}
	for _, c := range demoContrasts {
		fitArgs = append(fitArgs, "--contrast", c)
	}
	ffs, m, _ := fitFlags()
	if err := parseFlags(ffs, fitArgs); err != nil {
		return err
	}
	res, err := fitStudy(ctx, ffs, m, ffs.Args(), resultsDir, append([]string{"tessera", "fit"}, fitArgs...))
	if err != nil {
		return err
	}
	printSummary(stdout, res, resultsDir)
	if err := runGroupDir(resultsDir, stdout, stderr); err != nil {
		return err
	}
	for _, w := range res.Warnings {
		fmt.Fprintf(stderr, "warning: %s\n", w)
	}
	return nil
}
