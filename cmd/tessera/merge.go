package main

import (
	"context"
	"fmt"
	"io"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/report"
)

var mergeCommand = &command{
	name:    "merge",
	args:    "DIR... -o DIR",
	summary: "join the outputs of sharded fits (fit --shard I/N) into the tables one unsharded fit writes",
	example: `tessera fit study.csv -o part1 --shard 1/2
tessera fit study.csv -o part2 --shard 2/2
tessera merge part1 part2 -o results`,
	flags: func() *flag.FlagSet { fs, _, _ := mergeFlags(); return fs },
}

func init() { mergeCommand.runCtx = runMerge }

func mergeFlags() (*flag.FlagSet, *string, *bool) {
	fs := flag.NewFlagSet("merge", flag.ContinueOnError)
	out := fs.StringP("output", "o", "", "folder for the merged results (required)")
	over := fs.Bool("overwrite", false, "replace the results already in the -o folder")
	return fs, out, over
}

func runMerge(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs, out, over := mergeFlags()
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usagef("-o DIR is required: the folder for the merged results")
	}
	dirs := fs.Args()
	if len(dirs) == 0 {
		return usagef("expected the shard folders to merge")
	}
	if found := report.ExistingResults(*out); len(found) > 0 && !*over {
		return fmt.Errorf("-o %s already holds results (%v); use --overwrite to replace them, or choose another folder", *out, found)
	}
	o, err := report.NewOutput(*out)
	if err != nil {
		return err
	}
	if err := report.Merge(dirs, o); err != nil {
		o.Abort()
		return err
	}
	if ctx.Err() != nil {
		// SIGINT or SIGTERM while merging: nothing is committed, and the
		// temporary files go.
		o.Abort()
		return errInterrupted
	}
	if err := o.CommitReplacing(); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "merged %d shard folder(s) into %s\nreport: %s\n", len(dirs), *out, joinPath(*out, "report.md"))
	return nil
}
