package main

import (
	"fmt"
	"io"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/simulate"
)

var simulateCommand = &command{
	name:    "simulate",
	args:    "-o DIR [flags]",
	summary: "write a synthetic study with known truth (truth.csv) for testing pipelines and planning",
	example: `tessera simulate -o sim --subjects 10 --runs 2 --regions 50 --volumes 300 --tr 0.8 --design block --seed 7
tessera fit sim/study.csv -o sim-results`,
	flags: func() *flag.FlagSet { fs, _, _ := simulateFlags(); return fs },
}

func init() { simulateCommand.run = runSimulate }

func simulateFlags() (*flag.FlagSet, *simulate.Options, *string) {
	fs := flag.NewFlagSet("simulate", flag.ContinueOnError)
	o := &simulate.Options{}
	out := fs.StringP("output", "o", "", "folder for the study (required)")
	fs.IntVar(&o.Subjects, "subjects", 4, "subjects")
	fs.IntVar(&o.Runs, "runs", 2, "runs per subject")
	fs.IntVar(&o.Regions, "regions", 20, "regions")
	fs.IntVar(&o.Volumes, "volumes", 200, "volumes per run")
	fs.Float64Var(&o.TR, "tr", 2, "repetition time in seconds")
	fs.StringVar(&o.Design, "design", "block", "block or event")
	fs.Float64Var(&o.NullShare, "null-share", 0.5, "share of regions with no effect")
	fs.Float64Var(&o.WhiteShare, "white-share", 0.5, "share of noise variance that is white; the rest is AR(1) with a coefficient drawn per region from 0.2-0.6")
	fs.Uint64Var(&o.Seed, "seed", 1, "random seed; the same seed gives the same study")
	return fs, o, out
}

func runSimulate(args []string, stdout, stderr io.Writer) error {
	fs, o, out := simulateFlags()
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usagef("-o DIR is required: the folder for the study")
	}
	if fs.NArg() > 0 {
		return usagef("unexpected arguments: %v", fs.Args())
	}
	if err := o.Validate(); err != nil {
		return usagef("%v", err)
	}
	st, err := simulate.Generate(*o)
	if err != nil {
		return err
	}
	if err := st.Write(*out); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %d run(s) of %d subject(s), %d regions, to %s (study table %s, truth %s)\n",
		len(st.Runs), o.Subjects, st.Options.Regions, *out, joinPath(*out, "study.csv"), joinPath(*out, "truth.csv"))
	return nil
}
