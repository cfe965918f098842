// Package simulate makes synthetic region-level studies with known truth,
// for testing pipelines, checking calibration and planning: event timing,
// planted percent signal changes, slow drift, head motion that leaks into
// the signal, and noise that is part AR(1), part white. Everything is drawn
// from one seeded generator, so a seed gives the same study byte for byte.
//
// The planted responses are built with the same design code that fits them
// (fit.BuildDesign), so a region's truth is exactly the psc that an unbiased
// fit should recover in expectation.
package simulate

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/roi"
)

// Options set the size and the truth of a simulated study.
type Options struct {
	Subjects, Runs, Regions, Volumes int
	TR                               float64 // seconds
	Design                           string  // "block" or "event"
	NullShare                        float64 // share of regions with no effect
	WhiteShare                       float64 // share of noise variance that is white
	Seed                             uint64
	Conditions                       []string // default ordered, jumbled
	RegionNames                      []string // default region_001, ...
	// ARLow, ARHigh bound the AR(1) coefficient drawn per region (default
	// 0.2-0.6).
	ARLow, ARHigh float64
	// NoisePercent is the noise standard deviation in percent of the
	// baseline (default 1).
	NoisePercent float64
	// EffectLow, EffectHigh bound the planted group-level psc of active
	// regions (default 0.3-1.0); subjects vary around it with sd 0.15.
	EffectLow, EffectHigh float64
	// Effects, when set, plants these group-level psc values (one per
	// condition, in Conditions order) by region name instead of drawing
	// them; regions it does not name have no effect.
	Effects map[string][]float64
	// NoDrift and NoMotion turn off drift and motion (for pure-noise
	// calibration studies).
	NoDrift, NoMotion bool
}

// Defaults fills unset fields.
func (o *Options) Defaults() {
	if o.Subjects == 0 {
		o.Subjects = 4
	}
	if o.Runs == 0 {
		o.Runs = 2
	}
	if o.Regions == 0 {
		o.Regions = 20
	}
	if o.Volumes == 0 {
		o.Volumes = 200
	}
	if o.TR == 0 {
		o.TR = 2
	}
	if o.Design == "" {
		o.Design = "block"
	}
	if len(o.Conditions) == 0 {
		o.Conditions = []string{"ordered", "jumbled"}
	}
	if len(o.RegionNames) == 0 {
		for i := 0; i < o.Regions; i++ {
			o.RegionNames = append(o.RegionNames, fmt.Sprintf("region_%03d", i+1))
		}
	}
	o.Regions = len(o.RegionNames)
	if o.ARHigh == 0 {
		o.ARLow, o.ARHigh = 0.2, 0.6
	}
	if o.NoisePercent == 0 {
		o.NoisePercent = 1
	}
	if o.EffectHigh == 0 {
		o.EffectLow, o.EffectHigh = 0.3, 1.0
	}
}

// Validate reports options that cannot make a study.
func (o *Options) Validate() error {
	switch {
	case o.Subjects < 1 || o.Runs < 1 || o.Regions < 1:
		return fmt.Errorf("--subjects, --runs and --regions must be at least 1")
	case o.Volumes < 20:
		return fmt.Errorf("--volumes %d: expected at least 20", o.Volumes)
	case !(o.TR >= roi.MinTR) || o.TR > 20:
		return fmt.Errorf("--tr %g: expected seconds from %g to 20", o.TR, roi.MinTR)
	case o.Design != "block" && o.Design != "event":
		return fmt.Errorf("--design %q: expected block or event", o.Design)
	case o.NullShare < 0 || o.NullShare > 1:
		return fmt.Errorf("--null-share %g: expected a share from 0 to 1", o.NullShare)
	case o.WhiteShare < 0 || o.WhiteShare > 1:
		return fmt.Errorf("--white-share %g: expected a share from 0 to 1", o.WhiteShare)
	}
	return nil
}

// Run is one simulated run.
type Run struct {
	Subject, Run string
	TR           float64
	Events       []roi.Event
	Regions      []string
	Signals      [][]float64 // Signals[region][volume]
	Motion       [][]float64 // six columns: tx, ty, tz (mm), rx, ry, rz (radians)
}

// Truth is one planted effect.
type Truth struct {
	Subject, Run, Region, Condition string
	PSC                             float64
}

// Study is a simulated study.
type Study struct {
	Options Options
	Runs    []Run
	Truth   []Truth
}

// MotionNames are the confound columns simulated studies write.
var MotionNames = []string{"tx", "ty", "tz", "rx", "ry", "rz"}

// Generate makes a study.
func Generate(o Options) (*Study, error) {
	o.Defaults()
	if err := o.Validate(); err != nil {
		return nil, err
	}
	rng := rand.New(rand.NewPCG(o.Seed, 0x7e55e7a))
	st := &Study{Options: o}
	nActive := int(math.Round(float64(o.Regions) * (1 - o.NullShare)))
	// Group-level effects per region and condition.
	group := make([][]float64, o.Regions)
	baseline := make([]float64, o.Regions)
	for r := range group {
		group[r] = make([]float64, len(o.Conditions))
		baseline[r] = 600 + 800*rng.Float64()
		if r < nActive {
			for c := range group[r] {
				group[r][c] = o.EffectLow + (o.EffectHigh-o.EffectLow)*rng.Float64()
			}
		}
		if o.Effects != nil {
			e := o.Effects[o.RegionNames[r]]
			for c := range group[r] {
				group[r][c] = 0
				if c < len(e) {
					group[r][c] = e[c]
				}
			}
		}
	}
	active := func(r int) bool {
		if o.Effects != nil {
			return o.Effects[o.RegionNames[r]] != nil
		}
		return r < nActive
	}
	for s := 0; s < o.Subjects; s++ {
		subj := fmt.Sprintf("%02d", s+1)
		subjEffect := make([][]float64, o.Regions)
		for r := range subjEffect {
			subjEffect[r] = make([]float64, len(o.Conditions))
			for c := range subjEffect[r] {
				if active(r) {
					subjEffect[r][c] = group[r][c] + 0.15*rng.NormFloat64()
				}
			}
		}
		for k := 0; k < o.Runs; k++ {
			run, err := o.makeRun(rng, subj, fmt.Sprint(k+1), baseline, subjEffect)
			if err != nil {
				return nil, err
			}
			st.Runs = append(st.Runs, *run)
			for r, name := range o.RegionNames {
				for c, cond := range o.Conditions {
					st.Truth = append(st.Truth, Truth{subj, run.Run, name, cond, subjEffect[r][c]})
				}
			}
		}
	}
	return st, nil
}

func (o *Options) makeRun(rng *rand.Rand, subj, runID string, baseline []float64, effect [][]float64) (*Run, error) {
	n := o.Volumes
	run := &Run{Subject: subj, Run: runID, TR: o.TR, Regions: o.RegionNames}
	run.Events = o.events(rng)
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: n, TR: o.TR, SliceRef: 0.5, HRF: fit.HRFDoubleGamma, Events: run.Events})
	if err != nil {
		return nil, err
	}
	// Motion: a slow random walk per parameter plus rare jerks.
	run.Motion = make([][]float64, 6)
	for j := range run.Motion {
		scale := 0.02 // mm per volume
		if j >= 3 {
			scale = 0.0003 // radians per volume
		}
		m := make([]float64, n)
		v := 0.0
		for t := range m {
			if !o.NoMotion {
				v += scale * rng.NormFloat64()
				if rng.Float64() < 0.01 {
					v += 10 * scale * rng.NormFloat64()
				}
			}
			m[t] = v
		}
		run.Motion[j] = m
	}
	run.Signals = make([][]float64, o.Regions)
	for r := range run.Signals {
		b := baseline[r]
		sd := o.NoisePercent / 100 * b
		rho := o.ARLow + (o.ARHigh-o.ARLow)*rng.Float64()
		arSD := sd * math.Sqrt(1-o.WhiteShare)
		whiteSD := sd * math.Sqrt(o.WhiteShare)
		innov := arSD * math.Sqrt(1-rho*rho)
		e := arSD * rng.NormFloat64() // stationary start
		driftAmp := 0.0
		if !o.NoDrift {
			driftAmp = 0.01 * b * rng.NormFloat64()
		}
		coupling := make([]float64, 6)
		for j := range coupling {
			if !o.NoMotion {
				coupling[j] = 0.3 * b / 100 * rng.NormFloat64() // per mm or per 0.01 rad
				if j >= 3 {
					coupling[j] *= 100
				}
			}
		}
		y := make([]float64, n)
		for t := range y {
			if t > 0 {
				e = rho*e + innov*rng.NormFloat64()
			}
			v := b + e + whiteSD*rng.NormFloat64()
			// Drift: one slow cosine over the run, a period well beyond the
			// 128 s cut-off for any run longer than 64 s.
			v += driftAmp * math.Cos(math.Pi*float64(t)/float64(n))
			for j := range coupling {
				v += coupling[j] * run.Motion[j][t]
			}
			for c := range o.Conditions {
				if j := d.TermIndex(o.Conditions[c]); j >= 0 {
					v += effect[r][c] / 100 * b * d.X.At(t, j)
				}
			}
			y[t] = v
		}
		run.Signals[r] = y
	}
	return run, nil
}

// events lays out the run's events: blocks of 16 s cycling through the
// conditions with 12-16 s of rest between, or brief events (1 s) in random
// order with 3-7 s between onsets.
func (o *Options) events(rng *rand.Rand) []roi.Event {
	end := float64(o.Volumes) * o.TR
	var evs []roi.Event
	t := 8.0
	i := 0
	for {
		c := o.Conditions[i%len(o.Conditions)]
		switch o.Design {
		case "block":
			if t+16 > end-8 {
				return evs
			}
			evs = append(evs, roi.Event{Onset: t, Duration: 16, Amplitude: 1, Condition: c})
			t += 16 + 12 + 4*rng.Float64()
		default:
			c = o.Conditions[rng.IntN(len(o.Conditions))]
			if t > end-16 {
				return evs
			}
			evs = append(evs, roi.Event{Onset: t, Duration: 1, Amplitude: 1, Condition: c})
			t += 3 + 4*rng.Float64()
		}
		i++
		// Round onsets to milliseconds, as event logs record them.
		evs[len(evs)-1].Onset = math.Round(evs[len(evs)-1].Onset*1000) / 1000
	}
}

// Inputs returns the study as the runs that roi reads from a written study
// (signals, events, and the motion estimates as the confounds table), for
// fitting a simulated study in memory. The runs share the study's slices.
func (s *Study) Inputs() []*roi.Run {
	runs := make([]*roi.Run, len(s.Runs))
	for i, r := range s.Runs {
		runs[i] = &roi.Run{
			Spec:      roi.RunSpec{Subject: r.Subject, Run: r.Run, TR: r.TR},
			Signals:   &roi.Numeric{Names: r.Regions, Cols: r.Signals},
			Events:    &roi.Events{Events: r.Events},
			Confounds: &roi.Numeric{Names: MotionNames, Cols: r.Motion},
		}
	}
	return runs
}
