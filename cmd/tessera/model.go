package main

import (
	"fmt"
	"path/filepath"
	"runtime"
	"strings"
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
	contrasts []string
	motion    []string
	confounds []string
	jobs      int
	// single-run form
	signals, events, confoundsFile string
}

func (m *modelFlags) register(fs *flag.FlagSet) {
	fs.Float64Var(&m.tr, "tr", 0, "repetition time in seconds (overrides the study table; required with -s)")
	fs.Float64Var(&m.sliceRef, "slice-ref", 0.5, "when within each volume the model is sampled, as a fraction of TR")
	fs.StringVar(&m.hrf, "hrf", fit.HRFDoubleGamma, "response model")
	fs.Float64Var(&m.highpass, "highpass", 128, "cosine drift terms for periods longer than this many seconds; 0 for none")
	fs.StringVar(&m.noise, "noise", "ar1", "noise model: none, ar1 or ar:P (P = 1..8)")
	fs.StringArrayVar(&m.contrasts, "contrast", nil, "contrast 'NAME = EXPR', e.g. 'ordered - jumbled' (repeatable; default one per condition)")
	fs.StringSliceVar(&m.motion, "motion", nil, "the six motion columns of the confounds table (default tx,ty,tz,rx,ry,rz where all exist)")
	fs.StringSliceVar(&m.confounds, "confounds", nil, "further confound columns to model, comma-separated")
	fs.IntVar(&m.jobs, "jobs", runtime.NumCPU(), "runs fitted in parallel")
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
	if m.hrf != fit.HRFDoubleGamma {
		return o, usagef("--hrf %q: expected %s", m.hrf, fit.HRFDoubleGamma)
	}
	if m.sliceRef < 0 || m.sliceRef >= 1 {
		return o, usagef("--slice-ref %g: expected a fraction of TR from 0 to below 1", m.sliceRef)
	}
	if m.highpass < 0 {
		return o, usagef("--highpass %g: expected seconds >= 0", m.highpass)
	}
	if m.tr < 0 {
		return o, usagef("--tr %g: expected seconds > 0", m.tr)
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
	runs   []*roi.Run
	inputs []string // every file read
}

// load reads the study (one positional argument) or the single run (-s).
func (m *modelFlags) load(args []string) (*loaded, error) {
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
	for _, s := range specs {
		r, err := roi.LoadRun(s, roi.LoadOptions{})
		if err != nil {
			return nil, err
		}
		l.runs = append(l.runs, r)
		for _, p := range []string{s.Signals, s.Events, s.Confounds} {
			if p != "" {
				l.inputs = append(l.inputs, p)
			}
		}
	}
	return l, nil
}

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
