package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"strings"
	"time"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/report"
)

var fitCommand = &command{
	name:    "fit",
	args:    "STUDY -o DIR [model flags]  |  tessera fit -s SIGNALS [-e EVENTS] [-c CONFOUNDS] --tr S -o DIR [model flags]",
	summary: "fit every run, combine runs within each subject, write the tables and the report",
	example: `tessera fit study.csv -o results --contrast 'shape = ordered - jumbled'
tessera fit -s sub-01_signals.csv -e sub-01_events.tsv -c sub-01_confounds.csv --tr 2 -o results --noise ar:2`,
	flags: func() *flag.FlagSet { fs, _, _ := fitFlags(); return fs },
}

func init() { fitCommand.runCtx = runFit }

func fitFlags() (*flag.FlagSet, *modelFlags, *string) {
	fs := flag.NewFlagSet("fit", flag.ContinueOnError)
	m := &modelFlags{}
	m.register(fs)
	out := fs.StringP("output", "o", "", "folder for the results (required)")
	fs.BoolVar(&m.overwrite, "overwrite", false, "replace the results already in the -o folder (they are otherwise never overwritten)")
	fs.BoolVar(&m.quiet, "quiet", false, "no progress bar")
	fs.StringVar(&m.shard, "shard", "", "fit only the I-th of N disjoint sets of subjects (I/N, I from 1); join the outputs with tessera merge")
	return fs, m, out
}

func runFit(ctx context.Context, args []string, stdout, stderr io.Writer) error {
	fs, m, out := fitFlags()
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usagef("-o DIR is required: the folder for the results")
	}
	m.progress = newProgress(stderr, m.quiet, "fitting runs")
	res, err := fitStudy(ctx, fs, m, fs.Args(), *out, append([]string{"tessera", "fit"}, args...))
	if err != nil {
		return err
	}
	printSummary(stdout, res, *out)
	for _, w := range res.Warnings {
		fmt.Fprintf(stderr, "warning: %s\n", w)
	}
	return nil
}

// fitStudy reads, plans, fits and writes one study into outDir.
// command is the full command line that asked for the fit, recorded in
// provenance.json and quoted in report.md.
func fitStudy(ctx context.Context, fs *flag.FlagSet, m *modelFlags, args []string, outDir string, command []string) (*fit.StudyResult, error) {
	tm := newTimer()
	o, err := m.options()
	if err != nil {
		return nil, err
	}
	if found := report.ExistingResults(outDir); len(found) > 0 && !m.overwrite {
		return nil, fmt.Errorf("-o %s already holds results (%s); use --overwrite to replace them, or choose another folder", outDir, strings.Join(found, ", "))
	}
	l, err := m.load(args, o)
	if err != nil {
		return nil, err
	}
	if err := checkOutputDir(outDir, l.inputs); err != nil {
		return nil, err
	}
	tm.mark("read")
	plans := l.plans
	o.Progress = m.progress
	if ms, err := strconv.Atoi(os.Getenv(testRunDelayEnv)); err == nil && ms > 0 {
		// A test hook: pause after each run so that a test can interrupt a
		// fit in the middle (see TestInterrupt).
		bar := o.Progress
		o.Progress = func(done, total int) {
			time.Sleep(time.Duration(ms) * time.Millisecond)
			if bar != nil {
				bar(done, total)
			}
		}
	}
	res, err := fit.FitStudyContext(ctx, plans, o)
	if err != nil {
		return nil, err
	}
	tm.mark("fit")
	fitted := 0
	for _, p := range plans {
		if !p.Skipped() {
			fitted++
		}
	}
	if fitted == 0 {
		var why []string
		for i, p := range plans {
			if i == 3 {
				why = append(why, fmt.Sprintf("and %d more", len(plans)-3))
				break
			}
			n, k := p.Design.X.Dims()
			w := fmt.Sprintf("run %s: %d volumes, %d terms (%d of them for censored volumes): %s", p.Run.Spec.Key(), n, k, p.Design.CensoredCount(), p.Skip)
			if len(p.NoValues) > 0 {
				w += fmt.Sprintf(", as region %s has no value in any volume (remove its column)", strings.Join(p.NoValues, ", "))
			}
			why = append(why, w)
		}
		return nil, fmt.Errorf("no run can be fitted (%s); use fewer terms (drift, motion expansions, conditions), less censoring, or --noise none", strings.Join(why, "; "))
	}
	prov := &report.Provenance{Program: "tessera", Version: version, Command: command, Options: map[string]string{}, Timings: tm.marks, Shard: l.shard}
	fs.VisitAll(func(f *flag.Flag) { prov.Options[f.Name] = f.Value.String() })
	prov.Warnings = res.Warnings
	// The inputs' hashes are only needed for provenance.json, so they are
	// computed while the results are written (reading a large study again
	// takes a while); a hashing error still comes first, as when the
	// hashes were computed before writing.
	hashed := make(chan error, 1)
	go func() {
		for _, in := range l.inputs {
			h, err := report.HashFile(in)
			if err != nil {
				hashed <- err
				return
			}
			prov.Inputs = append(prov.Inputs, h)
		}
		hashed <- nil
	}()
	outp, err := report.NewOutput(outDir)
	if err != nil {
		if herr := <-hashed; herr != nil {
			return nil, herr
		}
		return nil, err
	}
	files := []string{"report.md", "estimates.csv", "contrasts.csv", "subject_contrasts.csv", "diagnostics.csv", "autocorrelation.csv", "design/", "figures/", "provenance.json"}
	werr := writeResults(outp, res, report.ReportInfo{Study: l.source, Command: quoteArgs(command), Outputs: files})
	if herr := <-hashed; herr != nil {
		outp.Abort()
		return nil, herr
	}
	if werr != nil {
		outp.Abort()
		return nil, werr
	}
	tm.mark("write")
	if err := report.WriteProvenance(outp, prov); err != nil {
		outp.Abort()
		return nil, err
	}
	if ctx.Err() != nil {
		outp.Abort()
		return nil, &fit.Interrupted{Done: len(plans), Total: len(plans)}
	}
	if err := outp.CommitReplacing(); err != nil {
		return nil, err
	}
	return res, nil
}

// writeResults writes the tables, the figures and report.md of a fit into
// outp. The tables do not depend on the figures, so they are written while
// the figures are drawn (report.md needs the figures' list, so it follows
// them); the error of the tables is reported before that of the figures
// and the report, as when they were written one after the other.
func writeResults(outp *report.Output, res *fit.StudyResult, info report.ReportInfo) error {
	tables := make(chan error, 1)
	go func() { tables <- report.WriteTables(outp, res) }()
	figs, err := report.WriteFigures(outp, res)
	if err == nil {
		info.Figures = figs
		err = report.WriteMarkdown(outp, res, info)
	}
	if terr := <-tables; terr != nil {
		return terr
	}
	return err
}

// printSummary tells what was fitted, the strongest subject-level findings
// and where the report is.
func printSummary(w io.Writer, res *fit.StudyResult, outDir string) {
	regions := 0
	for _, r := range res.Runs {
		if r.Fit != nil {
			regions += len(r.Fit.Regions)
		}
	}
	fmt.Fprintf(w, "fitted %d run(s), %d region fits, noise model %s\n", len(res.Runs), regions, res.Options.Noise.Name)
	for _, c := range res.Contrasts {
		var rows []fit.SubjectResult
		for _, s := range res.Subjects {
			if s.Contrast == c.Name {
				rows = append(rows, s)
			}
		}
		sort.SliceStable(rows, func(i, j int) bool { return math.Abs(rows[i].Statistic) > math.Abs(rows[j].Statistic) })
		fmt.Fprintf(w, "contrast %s: strongest subject-level results\n", c.Name)
		for i, s := range rows {
			if i == 3 {
				break
			}
			fmt.Fprintf(w, "  subject %s  %-16s psc %6.3f%%  t %6.2f  q %s\n", s.Subject, s.Region, s.PSC, s.Statistic, report.FormatQ(s.Q))
		}
	}
	fmt.Fprintf(w, "report: %s\n", joinPath(outDir, "report.md"))
}

func joinPath(dir, file string) string {
	return strings.TrimSuffix(dir, string(os.PathSeparator)) + string(os.PathSeparator) + file
}

// testRunDelayEnv names the environment variable of the interrupt test's
// hook: milliseconds to pause after each fitted run.
const testRunDelayEnv = "TESSERA_TEST_RUN_DELAY_MS"

// quoteArgs joins a command line for reading, quoting arguments that hold
// spaces or shell characters.
func quoteArgs(a []string) string {
	out := make([]string, len(a))
	for i, x := range a {
		if x == "" || strings.ContainsAny(x, " *'\"$;&|<>()") {
			x = "'" + strings.ReplaceAll(x, "'", `'\''`) + "'"
		}
		out[i] = x
	}
	return strings.Join(out, " ")
}
