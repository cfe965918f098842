package fit_test

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/simulate"
)

// benchRun is the run of the performance target: 400 regions × 600 volumes
// at TR 0.8 s with a 30-term design (2 block conditions, 7 cosine drift
// terms, 6 motion and 14 further confound columns, intercept), noise AR(1)
// plus white (half the variance), seed fixed.
func benchRun(b *testing.B) (*fit.Design, []string, [][]float64) {
	b.Helper()
	st, err := simulate.Generate(simulate.Options{Subjects: 1, Runs: 1, Regions: 400, Volumes: 600, TR: 0.8,
		Design: "block", NullShare: 0.5, WhiteShare: 0.5, Seed: 2024})
	if err != nil {
		b.Fatal(err)
	}
	r := st.Runs[0]
	var mot, conf []fit.Column
	for j, name := range simulate.MotionNames {
		mot = append(mot, fit.Column{Name: name, Values: r.Motion[j]})
	}
	rng := rand.New(rand.NewPCG(7, 11))
	for c := 0; c < 14; c++ {
		v := make([]float64, 600)
		x := 0.0
		for t := range v {
			x = 0.9*x + rng.NormFloat64()
			v[t] = x
		}
		conf = append(conf, fit.Column{Name: fmt.Sprintf("c%02d", c), Values: v})
	}
	d, err := fit.BuildDesign(fit.DesignSpec{Volumes: 600, TR: 0.8, SliceRef: 0.5, Highpass: 128,
		HRF: fit.HRFDoubleGamma, Events: r.Events, Motion: mot, Confound: conf})
	if err != nil {
		b.Fatal(err)
	}
	if _, k := d.X.Dims(); k != 30 {
		b.Fatalf("%d terms, want 30", k)
	}
	if _, err := fit.CheckDesign("bench", d); err != nil {
		b.Fatal(err)
	}
	return d, r.Regions, r.Signals
}

func benchmarkFitRun(b *testing.B, noise string) {
	d, names, y := benchRun(b)
	nm, err := fit.ParseNoise(noise)
	if err != nil {
		b.Fatal(err)
	}
	nm = nm.ForTR(0.8)
	b.ResetTimer()
	var rf *fit.RunFit
	for i := 0; i < b.N; i++ {
		if rf, err = fit.FitRun(d, names, y, nm); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	passes := 0
	for _, r := range rf.Regions {
		passes += r.NoisePasses
	}
	b.ReportMetric(float64(passes)/float64(len(rf.Regions)), "passes/region")
}

// BenchmarkFitRunAuto is the speed target of the noise models: one run of
// 400 regions × 600 volumes × 30 terms with --noise auto (Pmax 8 at TR
// 0.8 s); run with -cpu 1 for the one-core figure in the README.
func BenchmarkFitRunAuto(b *testing.B) { benchmarkFitRun(b, "auto") }

// BenchmarkFitRunAR1 and BenchmarkFitRunOLS are the same run with
// --noise ar1 and none, for comparison.
func BenchmarkFitRunAR1(b *testing.B) { benchmarkFitRun(b, "ar1") }
func BenchmarkFitRunOLS(b *testing.B) { benchmarkFitRun(b, "none") }
