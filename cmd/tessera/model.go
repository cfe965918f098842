package main

import (
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	flag "github.com/spf13/pflag"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/report"
	"github.com/tessera-fmri/tessera/roi"
)

const version = report.Version

// modelFlags are the flags shared by check and fit.
type modelFlags struct {
	tr        float64
	sliceRef  float64
	hrf       string
	highpass  float64
	noise     string
	noisePool bool
	contrasts []string
	motion    []string
	confounds []string
	jobs      int
	// design options
	derivatives    []string
	firWindow      float64
	firBins        int
	modulate       []string
	motionTerms    int
	censorFD       float64
	censorMaxShare float64
	rotationUnit   string
	skipVolumes    int
	ftests         []string
	drift          string
	vifMax         float64
	corrMax        float64
	minEvents      int
	missing        string
	overwrite      bool
	shard          string
	quiet          bool
	progress       func(done, total int)
	// single-run form
	signals, events, confoundsFile string
}

func (m *modelFlags) register(fs *flag.FlagSet) {
	fs.Float64Var(&m.tr, "tr", 0, "repetition time in seconds (overrides the study table; required with -s)")
	fs.Float64Var(&m.sliceRef, "slice-ref", 0.5, "when within each volume the model is sampled, as a fraction of TR")
	fs.StringVar(&m.hrf, "hrf", fit.HRFDoubleGamma, "response model")
	fs.Float64Var(&m.highpass, "highpass", 128, "cosine drift terms for periods longer than this many seconds; 0 for none")
	fs.StringVar(&m.noise, "noise", fit.DefaultNoise, "noise model: auto (per region the AIC choice among AR(1..Pmax) and AR(1)+white), none, ar1, ar:P (P = 1..8) or arma (AR(1)+white by REML)")
	fs.BoolVar(&m.noisePool, "noise-pool", false, "estimate one noise model per run from all regions (for short runs)")
	fs.StringArrayVar(&m.contrasts, "contrast", nil, "contrast 'NAME = EXPR', e.g. 'ordered - jumbled' (repeatable; default one per condition)")
	fs.StringSliceVar(&m.motion, "motion", nil, "the six motion columns of the confounds table (default tx,ty,tz,rx,ry,rz where all exist)")
	fs.StringSliceVar(&m.confounds, "confounds", nil, "further confound columns to model, comma-separated")
	fs.IntVar(&m.jobs, "jobs", runtime.NumCPU(), "runs fitted in parallel")
	fs.StringSliceVar(&m.derivatives, "hrf-derivatives", nil, "add response derivatives: time, or time,dispersion (orthogonalised to each condition's main term)")
	fs.Float64Var(&m.firWindow, "fir-window", 0, "with --hrf fir: seconds after onset that the bins cover")
	fs.IntVar(&m.firBins, "fir-bins", 0, "with --hrf fir: number of bins")
	fs.StringArrayVar(&m.modulate, "modulate", nil, "parametric modulator CONDITION=COLUMN from an events column (repeatable)")
	fs.IntVar(&m.motionTerms, "motion-terms", 6, "motion terms: 6 (as given), 12 (plus backward differences), 24 (plus the squares of both)")
	fs.Float64Var(&m.censorFD, "censor-fd", 0, "censor volumes whose framewise displacement exceeds this many mm (one indicator term each); 0 for none")
	fs.Float64Var(&m.censorMaxShare, "censor-max-share", fit.DefaultAuditThresholds.CensoredShare, "flag runs with more than this share of volumes censored")
	fs.StringVar(&m.rotationUnit, "rotation-unit", "rad", "unit of the rotation columns, rad or deg (framewise displacement only)")
	fs.IntVar(&m.skipVolumes, "skip-volumes", 0, "drop the first N volumes of every run; onsets stay relative to the original first volume")
	fs.StringArrayVar(&m.ftests, "ftest", nil, "F test 'NAME = EXPR; EXPR; ...' of several contrast rows at once (repeatable)")
	fs.StringVar(&m.drift, "drift", "cosine", "drift terms: cosine (cut-off from --highpass) or poly:K (Legendre polynomials to order K)")
	fs.Float64Var(&m.vifMax, "vif-max", fit.DefaultAuditThresholds.VIF, "design audit: flag condition terms with a variance inflation factor above this")
	fs.Float64Var(&m.corrMax, "correlation-max", fit.DefaultAuditThresholds.Correlation, "design audit: flag pairs of conditions correlating beyond this")
	fs.StringVar(&m.missing, "missing", "error", "a missing or non-finite signal value: error (name the cell) or censor (censor that volume for every region of the run)")
	fs.IntVar(&m.minEvents, "min-events", fit.DefaultAuditThresholds.MinEvents, "warn when a condition has fewer events than this in a run")
	fs.StringVarP(&m.signals, "signals", "s", "", "single-run form: the signals table")
	fs.StringVarP(&m.events, "events", "e", "", "single-run form: the events table")
	fs.StringVarP(&m.confoundsFile, "confounds-file", "c", "", "single-run form: the confounds table")
}

// options turns the flags into fit options, refusing bad values.
func (m *modelFlags) options() (fit.Options, error) {
	o := fit.Options{TR: m.tr, SliceRef: m.sliceRef, HRF: m.hrf, Highpass: m.highpass, Confounds: m.confounds, Jobs: m.jobs}
	var err error
	if o.Noise, err = fit.ParseNoise(m.noise); err != nil {
		return o, usagef("%v", err)
	}
	o.Noise.Pool = m.noisePool
	switch m.hrf {
	case fit.HRFDoubleGamma, fit.HRFGamma:
		if m.firWindow != 0 || m.firBins != 0 {
			return o, usagef("--fir-window and --fir-bins go with --hrf fir")
		}
	case fit.HRFFIR:
		if m.firWindow <= 0 || m.firBins < 1 {
			return o, usagef("--hrf fir needs --fir-window S (seconds, > 0) and --fir-bins N (>= 1)")
		}
		if len(m.derivatives) > 0 || len(m.modulate) > 0 {
			return o, usagef("--hrf fir does not combine with --hrf-derivatives or --modulate")
		}
	default:
		return o, usagef("--hrf %q: expected %s, %s or %s", m.hrf, fit.HRFDoubleGamma, fit.HRFGamma, fit.HRFFIR)
	}
	o.FIRWindow, o.FIRBins = m.firWindow, m.firBins
	switch strings.Join(m.derivatives, ",") {
	case "":
	case fit.DerivativeTime, fit.DerivativeTime + "," + fit.DerivativeDispersion:
		if m.hrf != fit.HRFDoubleGamma {
			return o, usagef("--hrf-derivatives go with --hrf %s", fit.HRFDoubleGamma)
		}
		o.Derivatives = m.derivatives
	default:
		return o, usagef("--hrf-derivatives %q: expected time or time,dispersion", strings.Join(m.derivatives, ","))
	}
	for _, s := range m.modulate {
		c, col, ok := strings.Cut(s, "=")
		c, col = strings.TrimSpace(c), strings.TrimSpace(col)
		if !ok || c == "" || col == "" {
			return o, usagef("--modulate %q: expected CONDITION=COLUMN", s)
		}
		o.Modulate = append(o.Modulate, fit.Modulator{Condition: c, Column: col})
	}
	if m.motionTerms != 6 && m.motionTerms != 12 && m.motionTerms != 24 {
		return o, usagef("--motion-terms %d: expected 6, 12 or 24", m.motionTerms)
	}
	o.MotionTerms = m.motionTerms
	if m.censorFD < 0 {
		return o, usagef("--censor-fd %g: expected mm >= 0", m.censorFD)
	}
	o.CensorFD = m.censorFD
	switch m.rotationUnit {
	case "rad":
	case "deg":
		o.RotationDegrees = true
	default:
		return o, usagef("--rotation-unit %q: expected rad or deg", m.rotationUnit)
	}
	if m.skipVolumes < 0 {
		return o, usagef("--skip-volumes %d: expected a count >= 0", m.skipVolumes)
	}
	o.SkipVolumes = m.skipVolumes
	switch {
	case m.drift == "cosine":
	case strings.HasPrefix(m.drift, "poly:"):
		k, err := strconv.Atoi(m.drift[5:])
		if err != nil || k < 1 || k > 10 {
			return o, usagef("--drift %q: expected poly:K with K from 1 to 10", m.drift)
		}
		o.Poly = k
	default:
		return o, usagef("--drift %q: expected cosine or poly:K", m.drift)
	}
	for _, s := range m.ftests {
		f, err := fit.ParseFTest(s)
		if err != nil {
			return o, usagef("%v", err)
		}
		o.FTests = append(o.FTests, f)
	}
	if m.censorMaxShare <= 0 || m.censorMaxShare > 1 || m.vifMax <= 1 || m.corrMax <= 0 || m.corrMax >= 1 || m.minEvents < 0 {
		return o, usagef("audit thresholds: --censor-max-share in (0, 1], --vif-max > 1, --correlation-max in (0, 1), --min-events >= 0")
	}
	switch m.missing {
	case "error":
	case "censor":
		o.MissingCensor = true
	default:
		return o, usagef("--missing %q: expected error or censor", m.missing)
	}
	o.Audit = fit.AuditThresholds{VIF: m.vifMax, Correlation: m.corrMax, CensoredShare: m.censorMaxShare, MinEvents: m.minEvents}
	if m.sliceRef < 0 || m.sliceRef >= 1 {
		return o, usagef("--slice-ref %g: expected a fraction of TR from 0 to below 1", m.sliceRef)
	}
	if m.highpass < 0 {
		return o, usagef("--highpass %g: expected seconds >= 0", m.highpass)
	}
	if m.tr < 0 || (m.tr > 0 && m.tr < roi.MinTR) {
		return o, usagef("--tr %g: expected seconds, at least %g", m.tr, roi.MinTR)
	}
	if m.tr > 20 {
		return o, usagef("--tr %g: that looks like milliseconds; --tr is in seconds (e.g. --tr %g)", m.tr, m.tr/1000)
	}
	if m.jobs < 1 {
		return o, usagef("--jobs %d: expected at least 1 worker", m.jobs)
	}
	if m.motion != nil {
		if len(m.motion) != 6 {
			return o, usagef("--motion names %d columns; expected the six rigid-body columns (three translations, then three rotations)", len(m.motion))
		}
		o.Motion = m.motion
	}
	for _, s := range m.contrasts {
		c, err := fit.ParseContrast(s)
		if err != nil {
			return o, usagef("%v", err)
		}
		o.Contrasts = append(o.Contrasts, c)
	}
	return o, nil
}

// loaded is a study read from disk.
type loaded struct {
	source string // the study table, or the signals table in single-run form
	plans  []*fit.RunPlan
	inputs []string // every file read
	// shard describes the subset fitted with --shard (nil without it).
	shard *report.ShardInfo
}

// parseShard reads --shard I/N.
func parseShard(s string) (i, n int, err error) {
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(a)
	n, err2 := strconv.Atoi(b)
	if !ok || err1 != nil || err2 != nil || n < 1 || i < 1 || i > n {
		return 0, 0, usagef("--shard %q: expected I/N with 1 <= I <= N, e.g. --shard 2/8", s)
	}
	return i, n, nil
}

// selectShard keeps the runs of the subjects of shard i of n: subjects are
// numbered in order of first appearance in the study table and subject k
// (from 0) goes to shard k mod n + 1, so shards are disjoint, cover the study
// and stay balanced.
func selectShard(specs []roi.RunSpec, i, n int) ([]roi.RunSpec, *report.ShardInfo) {
	info := &report.ShardInfo{Index: i, Count: n}
	index := map[string]int{}
	for _, s := range specs {
		if _, ok := index[s.Subject]; !ok {
			index[s.Subject] = len(info.Subjects)
			info.Subjects = append(info.Subjects, s.Subject)
		}
		info.Runs = append(info.Runs, report.RunKey{Subject: s.Subject, Session: s.Session, Run: s.Run})
	}
	var out []roi.RunSpec
	for _, s := range specs {
		if index[s.Subject]%n == i-1 {
			out = append(out, s)
		}
	}
	return out, info
}

// load reads the study (one positional argument) or the single run (-s)
// and plans every run with the options o.
func (m *modelFlags) load(args []string, o fit.Options) (*loaded, error) {
	l := &loaded{}
	var specs []roi.RunSpec
	switch {
	case m.signals != "" && len(args) > 0:
		return nil, usagef("give either a study table or -s SIGNALS, not both")
	case m.signals != "":
		if m.tr == 0 {
			return nil, usagef("-s SIGNALS needs --tr (the repetition time in seconds)")
		}
		spec, err := roi.SingleRun(m.signals, m.events, m.confoundsFile, m.tr)
		if err != nil {
			return nil, err
		}
		specs = []roi.RunSpec{spec}
		l.source = m.signals
	case len(args) == 1:
		if m.events != "" || m.confoundsFile != "" {
			return nil, usagef("-e and -c belong to the single-run form with -s")
		}
		st, err := roi.ReadStudy(args[0])
		if err != nil {
			return nil, err
		}
		specs = st.Runs
		l.source = args[0]
		l.inputs = append(l.inputs, args[0])
	case len(args) == 0:
		return nil, usagef("expected a study table (STUDY) or -s SIGNALS")
	default:
		return nil, usagef("expected one study table, found %d arguments: %s", len(args), strings.Join(args, " "))
	}
	if m.shard != "" {
		i, n, err := parseShard(m.shard)
		if err != nil {
			return nil, err
		}
		all := specs
		specs, l.shard = selectShard(specs, i, n)
		// Contrast names are checked against the conditions of the whole
		// study, so that a shard without some condition accepts what the
		// unsharded fit accepts.
		if o.StudyConditions, err = studyConditions(all); err != nil {
			return nil, err
		}
		if len(specs) == 0 {
			return nil, fmt.Errorf("--shard %s: the study has %d subject(s), so this shard has none", m.shard, len(l.shard.Subjects))
		}
	}
	var total int64
	for i := range specs {
		if m.tr > 0 {
			// --tr overrides the study table before the run is read, so the
			// checks of event timing against the run's end use it too.
			specs[i].TR = m.tr
		}
		if st, err := os.Stat(specs[i].Signals); err == nil {
			total += st.Size()
		}
	}
	stream := total > streamBytes
	if stream && os.Getenv("GOGC") == "" {
		// Large inputs (unless GOGC says otherwise): collect garbage when the heap has grown by a
		// quarter rather than doubled. The heap is mostly slices of
		// numbers, which hold no pointers, so a collection costs little;
		// the default would let the peak reach twice what is live (a
		// 20,000 x 1,200 run: 1.08 GB peak RSS at the default, 0.71 GB at
		// 25, in the same time).
		debug.SetGCPercent(largeInputGCPercent)
	}
	// Runs are read and planned in parallel (jobs workers), each into its
	// own slot, so the order and the result do not depend on the workers.
	lopt := roi.LoadOptions{MissingCensor: m.missing == "censor"}
	plans := make([]*fit.RunPlan, len(specs))
	errs := make([]error, len(specs))
	bad := make([]error, len(specs)) // design problems, all reported together
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < max(1, min(m.jobs, len(specs))); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				r, err := roi.LoadRun(specs[i], lopt)
				if err != nil {
					errs[i] = err
					continue
				}
				p, err := fit.PlanRun(r, o)
				if err != nil {
					bad[i] = err
					continue
				}
				if stream {
					spec := specs[i]
					p.Release(func() (*roi.Numeric, error) {
						r, err := roi.LoadRun(spec, lopt)
						if err != nil {
							return nil, err
						}
						return r.Signals, nil
					})
				}
				plans[i] = p
			}
		}()
	}
	for i := range specs {
		next <- i
	}
	close(next)
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err // the first bad input in study order
		}
	}
	var problems []string
	for _, err := range bad {
		if err != nil {
			problems = append(problems, err.Error())
		}
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("%s", strings.Join(problems, "\n"))
	}
	for _, s := range specs {
		for _, p := range []string{s.Signals, s.Events, s.Confounds} {
			if p != "" {
				l.inputs = append(l.inputs, p)
			}
		}
	}
	l.plans = plans
	var err error
	if l.plans, err = fit.FinishPlan(l.plans, o); err != nil {
		return nil, err
	}
	return l, nil
}

// studyConditions returns the conditions named in the events tables of
// every run (sorted, each once), reading only the events tables.
func studyConditions(specs []roi.RunSpec) ([]string, error) {
	set := map[string]bool{}
	for _, s := range specs {
		if s.Events == "" {
			continue
		}
		ev, err := roi.ReadEvents(s.Events)
		if err != nil {
			return nil, err
		}
		for _, e := range ev.Events {
			set[e.Condition] = true
		}
	}
	out := []string{}
	for c := range set {
		out = append(out, c)
	}
	sort.Strings(out)
	return out, nil
}

// streamBytes is the total size of the signals tables beyond which runs are
// read one at a time when they are fitted (and read once before, to plan),
// so memory holds the runs in flight rather than the whole study.
var streamBytes int64 = 256 << 20

// largeInputGCPercent is the garbage collector's growth target (GOGC) for
// studies beyond streamBytes.
const largeInputGCPercent = 25

// checkOutputDir refuses an output folder that is, or is inside, a folder
// holding an input file: fit never writes inside an input folder.
func checkOutputDir(out string, inputs []string) error {
	absOut, err := filepath.Abs(out)
	if err != nil {
		return err
	}
	for _, in := range inputs {
		dir, err := filepath.Abs(filepath.Dir(in))
		if err != nil {
			return err
		}
		if rel, err := filepath.Rel(dir, absOut); err == nil && (rel == "." || !strings.HasPrefix(rel, "..")) {
			return fmt.Errorf("-o %s is inside %s, which holds the input %s; write results to a folder of their own", out, dir, in)
		}
	}
	return nil
}

// summary of timings for provenance.
type timer struct {
	start time.Time
	marks map[string]float64
}

func newTimer() *timer { return &timer{start: time.Now(), marks: map[string]float64{}} }

func (t *timer) mark(name string) {
	now := time.Now()
	t.marks[name] = now.Sub(t.start).Seconds()
	t.start = now
}
