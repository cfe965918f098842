package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/report"
	"github.com/tessera-fmri/tessera/roi"
)

var groupCommand = &command{
	name: "group",
	args: "DIR [-o OUT] [--participants FILE] [--compare COLUMN] [--covariates A,B] [--weighted] [--contrast NAME ...]",
	summary: "group results across subjects from a fit folder (or a subject_contrasts.csv): random-effects tests per " +
		"region, q and Holm's p across regions, Cohen's d with its interval, pilot power",
	example: `tessera group results
tessera group results --participants participants.tsv --compare group --covariates age
tessera group results -o group-weighted --weighted --contrast order
tessera group estimates_from_elsewhere.csv --measure estimate -o out`,
	flags: func() *flag.FlagSet { fs, _ := groupFlags(); return fs },
}

func init() { groupCommand.run = runGroup }

// groupOptions are the flags of the group command.
type groupOptions struct {
	out          string
	participants string
	compare      string
	covariates   []string
	weighted     bool
	contrasts    []string
	measure      string
}

func groupFlags() (*flag.FlagSet, *groupOptions) {
	fs := flag.NewFlagSet("group", flag.ContinueOnError)
	o := &groupOptions{}
	fs.StringVarP(&o.out, "output", "o", "", "folder for group.csv, power.csv and group-report.md (default: DIR, or the subject table's folder)")
	fs.StringVar(&o.participants, "participants", "", "participants table: a subject (or BIDS participant_id) column and any others; CSV or TSV")
	fs.StringVar(&o.compare, "compare", "", "participants column with two groups: Welch's t of the second level minus the first (levels sorted)")
	fs.StringSliceVar(&o.covariates, "covariates", nil, "participants columns entered, mean-centred, in a linear model across subjects, comma-separated")
	fs.BoolVar(&o.weighted, "weighted", false, "mixed effects: weight subjects by their own standard errors, REML between-subject variance, Knapp-Hartung tests")
	fs.StringArrayVar(&o.contrasts, "contrast", nil, "analyse only this contrast (repeatable; default every contrast in the table)")
	fs.StringVar(&o.measure, "measure", "psc", "column analysed: psc (percent signal change, comparable across subjects) or estimate (signal units)")
	return fs, o
}

func runGroup(args []string, stdout, stderr io.Writer) error {
	fs, o := groupFlags()
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("expected one fit output folder or subject table (DIR), found %d arguments", fs.NArg())
	}
	return groupRun(o, fs.Arg(0), "tessera "+strings.Join(append([]string{"group"}, args...), " "), stdout, stderr)
}

// runGroupDir runs the group level with default options on a fit output
// folder, writing into that folder (the demo calls it after its fit).
func runGroupDir(dir string, stdout, stderr io.Writer) error {
	_, o := groupFlags()
	return groupRun(o, dir, "tessera group "+dir, stdout, stderr)
}

// groupRun reads, fits and writes one group analysis, then prints its
// summary (stdout) and warnings (stderr).
func groupRun(o *groupOptions, dir, command string, stdout, stderr io.Writer) error {
	if o.measure != "psc" && o.measure != "estimate" {
		return usagef("--measure %q: expected psc or estimate", o.measure)
	}
	if (o.compare != "" || len(o.covariates) > 0) && o.participants == "" {
		return usagef("--compare and --covariates name columns of the participants table: give it with --participants FILE")
	}
	for _, c := range o.covariates {
		if c == o.compare {
			return usagef("column %q is given to both --compare and --covariates", c)
		}
	}
	input, outDir, err := groupPaths(dir, o.out)
	if err != nil {
		return err
	}
	sc, err := roi.ReadSubjectContrasts(input)
	if err != nil {
		return err
	}
	g, err := prepareGroup(o, sc)
	if err != nil {
		return err
	}
	res, err := fit.Group(g.samples, g.spec)
	if err != nil {
		return err
	}
	warnings := append(g.warnings, res.Warnings...)
	if len(res.Rows) == 0 {
		return fmt.Errorf("%s: no contrast and region could be tested by the group model; %s", input, strings.Join(warnings, "; "))
	}
	inputs := []string{input}
	if o.participants != "" {
		inputs = append(inputs, o.participants)
	}
	files := []string{"group.csv", "power.csv", "group-report.md", "figures/group_*.png"}
	if err := checkNotInputs(outDir, files, inputs); err != nil {
		return err
	}
	out, err := report.NewOutput(outDir)
	if err != nil {
		return err
	}
	info := report.GroupReportInfo{Input: input, Participants: o.participants, Measure: o.measure, Command: command,
		Subjects: g.subjects, Used: g.used, Warnings: warnings, Outputs: files}
	if err := report.WriteGroupTables(out, res); err != nil {
		out.Abort()
		return err
	}
	figs, err := report.WriteGroupFigures(out, res)
	if err != nil {
		out.Abort()
		return err
	}
	info.Figures = figs
	if err := report.WriteGroupMarkdown(out, res, info); err != nil {
		out.Abort()
		return err
	}
	if err := out.Commit(); err != nil {
		return err
	}
	printGroupSummary(stdout, res, g, outDir)
	for _, w := range warnings {
		fmt.Fprintf(stderr, "warning: %s\n", w)
	}
	return nil
}

// groupPaths resolves DIR (a folder holding subject_contrasts.csv, or the
// table itself) and the output folder (default: the table's folder).
func groupPaths(dir, out string) (input, outDir string, err error) {
	input = dir
	st, err := os.Stat(dir)
	if err != nil {
		return "", "", &roi.InputError{File: dir, Found: "no such file or folder",
			Expected: "a fit output folder holding subject_contrasts.csv, or a table with its columns"}
	}
	if st.IsDir() {
		input = filepath.Join(dir, report.SubjectContrasts.File)
	}
	if out == "" {
		out = filepath.Dir(input)
	}
	return input, out, nil
}

// checkNotInputs refuses to write an output file over an input file.
func checkNotInputs(outDir string, files, inputs []string) error {
	for _, f := range files {
		o, err := filepath.Abs(filepath.Join(outDir, f))
		if err != nil {
			return err
		}
		for _, in := range inputs {
			if a, err := filepath.Abs(in); err == nil && a == o {
				return fmt.Errorf("-o %s would overwrite the input %s with %s; write to another folder", outDir, in, f)
			}
		}
	}
	return nil
}

// groupInput is the group model and its samples, built from the tables.
type groupInput struct {
	spec     fit.GroupSpec
	samples  []fit.GroupSample
	warnings []string
	subjects int // distinct subjects in the subject table
	used     int // subjects in at least one sample
}

// prepareGroup picks the contrasts, matches subjects with the participants
// table, leaves out (and lists) subjects without what the model needs, and
// gathers one sample per contrast and region.
func prepareGroup(o *groupOptions, sc *roi.SubjectContrasts) (*groupInput, error) {
	g := &groupInput{spec: fit.GroupSpec{Compare: o.compare, Covariates: o.covariates, Weighted: o.weighted}}
	if o.measure == "psc" && !sc.HasPSC {
		return nil, &roi.InputError{File: sc.Path, Line: 1, Found: "no column \"psc\"",
			Expected: "a psc column (percent signal change) to analyse, or --measure estimate to analyse the estimate column"}
	}
	if o.weighted && !sc.HasStdError {
		return nil, &roi.InputError{File: sc.Path, Line: 1, Found: "no column \"std_error\"",
			Expected: "each subject's standard error in a std_error column: --weighted weights subjects by it"}
	}
	var subjects, contrasts, regions []string
	seenS, seenC, seenR := map[string]bool{}, map[string]bool{}, map[string]bool{}
	for _, r := range sc.Rows {
		for _, x := range []struct {
			v    string
			seen map[string]bool
			list *[]string
		}{{r.Subject, seenS, &subjects}, {r.Contrast, seenC, &contrasts}, {r.Region, seenR, &regions}} {
			if !x.seen[x.v] {
				x.seen[x.v] = true
				*x.list = append(*x.list, x.v)
			}
		}
	}
	g.subjects = len(subjects)
	if len(o.contrasts) > 0 {
		for _, c := range o.contrasts {
			if !seenC[c] {
				return nil, &roi.InputError{File: sc.Path, Found: fmt.Sprintf("no contrast %q (--contrast)", c),
					Expected: "one of the table's contrasts: " + strings.Join(contrasts, ", ")}
			}
		}
		contrasts = o.contrasts
	}
	keep := map[string]bool{}
	for _, s := range subjects {
		keep[s] = true
	}
	if o.participants != "" {
		var err error
		if keep, err = matchParticipants(o, subjects, g); err != nil {
			return nil, err
		}
	}
	type key struct{ contrast, region string }
	byKey := map[key][]roi.SubjectContrast{}
	for _, r := range sc.Rows {
		byKey[key{r.Contrast, r.Region}] = append(byKey[key{r.Contrast, r.Region}], r)
	}
	used := map[string]bool{}
	for _, c := range contrasts {
		for _, region := range regions {
			rows, ok := byKey[key{c, region}]
			if !ok {
				continue
			}
			s := fit.GroupSample{Contrast: c, Region: region}
			var noValue, noSE []string
			bySubject := make(map[string]roi.SubjectContrast, len(rows))
			for _, r := range rows {
				bySubject[r.Subject] = r
			}
			for _, subj := range subjects {
				r, ok := bySubject[subj]
				if !keep[subj] {
					continue
				}
				if !ok { // no row for this contrast and region: as a missing value
					noValue = append(noValue, subj)
					continue
				}
				y, se := r.Estimate, r.StdError
				if o.measure == "psc" {
					// psc = 100 · estimate / baseline: the same factor scales the
					// standard error (exact when the subject's runs share one
					// baseline; otherwise the runs' weighted mix of factors).
					y, se = r.PSC, r.StdError*math.Abs(r.PSC/r.Estimate)
				}
				switch {
				case math.IsNaN(y) || math.IsInf(y, 0):
					noValue = append(noValue, r.Subject)
					continue
				case o.weighted && !(se > 0 && !math.IsInf(se, 0)):
					noSE = append(noSE, r.Subject)
					continue
				}
				s.Subjects = append(s.Subjects, r.Subject)
				s.Y = append(s.Y, y)
				s.SE = append(s.SE, se)
				used[r.Subject] = true
			}
			if len(noValue) > 0 {
				g.warnings = append(g.warnings, fmt.Sprintf("contrast %s, region %s: no %s for %s %s; left out of this region",
					c, region, o.measure, subjectWord(len(noValue)), strings.Join(noValue, ", ")))
			}
			if len(noSE) > 0 {
				g.warnings = append(g.warnings, fmt.Sprintf("contrast %s, region %s: no usable standard error (missing or 0) for %s %s; left out of the weighted model of this region",
					c, region, subjectWord(len(noSE)), strings.Join(noSE, ", ")))
			}
			g.samples = append(g.samples, s)
		}
	}
	g.used = len(used)
	return g, nil
}

// matchParticipants finds every subject in the participants table and
// reads the model's columns; it returns the subjects kept and fills
// g.spec.Subjects, Levels and the warnings that list the subjects left out.
func matchParticipants(o *groupOptions, subjects []string, g *groupInput) (map[string]bool, error) {
	p, err := roi.ReadParticipants(o.participants)
	if err != nil {
		return nil, err
	}
	cols := append([]string(nil), o.covariates...)
	if o.compare != "" {
		cols = append([]string{o.compare}, cols...)
	}
	if err := p.Require(cols...); err != nil {
		return nil, err
	}
	keep := map[string]bool{}
	info := map[string]fit.Subject{}
	levelOf := map[string]string{}
	var absent, incomplete []string
	for _, s := range subjects {
		i := p.Row(s)
		if i < 0 {
			absent = append(absent, s)
			continue
		}
		var missing []string
		sub := fit.Subject{}
		if o.compare != "" {
			v, miss := p.Text(i, o.compare)
			if miss {
				missing = append(missing, o.compare)
			}
			levelOf[s] = v
		}
		for _, c := range o.covariates {
			x, err := p.Number(i, c)
			if err != nil {
				return nil, err
			}
			if math.IsNaN(x) {
				missing = append(missing, c)
			}
			sub.Covariates = append(sub.Covariates, x)
		}
		if len(missing) > 0 {
			incomplete = append(incomplete, fmt.Sprintf("%s (%s)", s, strings.Join(missing, ", ")))
			continue
		}
		keep[s] = true
		info[s] = sub
	}
	if len(absent) > 0 {
		g.warnings = append(g.warnings, fmt.Sprintf("%s %s not in the participants table %s; left out of every model",
			subjectWord(len(absent)), strings.Join(absent, ", "), o.participants))
	}
	if len(incomplete) > 0 {
		g.warnings = append(g.warnings, fmt.Sprintf("%s with a missing value in the participants table %s: %s; left out of every model",
			subjectWord(len(incomplete)), o.participants, strings.Join(incomplete, ", ")))
	}
	if len(keep) == 0 {
		return nil, &roi.InputError{File: o.participants, Found: "none of the subjects of the subject table has a complete row here",
			Expected: "a row per subject with a value in every column the model uses (labels compared without a sub- prefix)"}
	}
	if o.compare != "" {
		var levels []string
		seen := map[string]bool{}
		for s := range keep {
			if !seen[levelOf[s]] {
				seen[levelOf[s]] = true
				levels = append(levels, levelOf[s])
			}
		}
		sort.Strings(levels)
		if len(levels) != 2 {
			return nil, &roi.InputError{File: o.participants, Field: o.compare,
				Found:    fmt.Sprintf("%d level(s) among the subjects analysed: %s", len(levels), strings.Join(levels, ", ")),
				Expected: "exactly two groups for --compare"}
		}
		g.spec.Levels = [2]string{levels[0], levels[1]}
		for s := range keep {
			sub := info[s]
			if levelOf[s] == levels[1] {
				sub.Group = 1
			}
			info[s] = sub
		}
	}
	g.spec.Subjects = info
	return keep, nil
}

func subjectWord(n int) string {
	if n == 1 {
		return "subject"
	}
	return "subjects"
}

// printGroupSummary tells what was analysed, the strongest regions of each
// contrast and term, and where the report is.
func printGroupSummary(w io.Writer, res *fit.GroupResult, g *groupInput, outDir string) {
	model := "one-sample t across subjects"
	switch {
	case len(res.Spec.Covariates) > 0:
		model = "linear model across subjects (covariates " + strings.Join(res.Spec.Covariates, ", ") + ")"
	case res.Spec.Compare != "":
		model = "one-sample t and Welch's t (" + res.Spec.CompareTerm() + ")"
	}
	if res.Spec.Weighted {
		model += ", weighted (REML, Knapp-Hartung)"
	}
	fmt.Fprintf(w, "group: %d subject(s) in %d contrast and region sample(s); %s\n", g.used, len(g.samples), model)
	var contrasts []string
	seen := map[string]bool{}
	for _, r := range res.Rows {
		if !seen[r.Contrast] {
			seen[r.Contrast] = true
			contrasts = append(contrasts, r.Contrast)
		}
	}
	for _, c := range contrasts {
		for _, term := range res.Terms {
			var rows []fit.GroupRow
			for _, r := range res.Rows {
				if r.Contrast == c && r.Term == term {
					rows = append(rows, r)
				}
			}
			sort.SliceStable(rows, func(i, j int) bool { return rows[i].PValue < rows[j].PValue })
			fmt.Fprintf(w, "contrast %s, %s: strongest regions\n", c, term)
			for i, r := range rows {
				if i == 3 {
					break
				}
				d := ""
				if !math.IsNaN(r.Effect.D) {
					d = fmt.Sprintf("  d %5.2f [%5.2f, %5.2f]", r.Effect.D, r.Effect.Low, r.Effect.High)
				}
				fmt.Fprintf(w, "  %-16s estimate %7.3f  t %6.2f  q %s%s\n", r.Region, r.Estimate, r.Statistic, report.FormatQ(r.Q), d)
			}
		}
	}
	fmt.Fprintf(w, "group report: %s\n", joinPath(outDir, "group-report.md"))
}
