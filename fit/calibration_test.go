package fit_test

import (
	"math"
	"testing"

	"github.com/tessera-fmri/tessera/simulate"
)

// nullShare fits every run of a simulated null study with one noise model
// (Pmax from each run's TR) and returns the share of p < 0.05 for the first
// condition's term, one test per region and run.
func nullShare(t *testing.T, st *simulate.Study, noise string) (share float64, tests int) {
	t.Helper()
	hits := 0
	for _, rf := range fitStudy(t, st, noise) {
		for _, reg := range rf.Regions {
			c := make([]float64, len(reg.Beta))
			c[0] = 1
			if reg.Contrast(c).PValue < 0.05 {
				hits++
			}
			tests++
		}
	}
	return float64(hits) / float64(tests), tests
}

// TestNullCalibrationAuto: on null regions whose noise is an AR(1) process
// (coefficient 0.2-0.6 per region) plus white noise of the same variance,
// --noise auto keeps the share of p < 0.05 inside the 99% binomial interval
// around 0.05 at TR 0.8 s (blocks, 500 volumes) and TR 2.0 s (events, 200
// volumes), 4,000 tests each (100 runs of 40 regions, so that no single
// design dominates; seeds fixed); ar1, which under-whitens such noise at
// short TR, falls outside it at TR 0.8 s. At TR 2.0 s the AR(1) part is
// weaker relative to the white part's effect and ar1 is near nominal
// (METHODS.md measures 5.2%), so there it is only reported.
func TestNullCalibrationAuto(t *testing.T) {
	if testing.Short() {
		t.Skip("simulation of 2 × 4,000 null tests")
	}
	for _, c := range []struct {
		name    string
		tr      float64
		design  string
		volumes int
		seed    uint64
		ar1Out  bool
	}{
		{"TR 0.8 s blocks", 0.8, "block", 500, 41, true},
		{"TR 2.0 s events", 2.0, "event", 200, 42, false},
	} {
		t.Run(c.name, func(t *testing.T) {
			st, err := simulate.Generate(simulate.Options{
				Subjects: 100, Runs: 1, Regions: 40, Volumes: c.volumes, TR: c.tr, Design: c.design,
				NullShare: 1, WhiteShare: 0.5, Seed: c.seed,
			})
			if err != nil {
				t.Fatal(err)
			}
			auto, n := nullShare(t, st, "auto")
			ar1, _ := nullShare(t, st, "ar1")
			half := 2.5758 * math.Sqrt(0.05*0.95/float64(n)) // z_0.995 · binomial sd
			if math.Abs(auto-0.05) > half {
				t.Errorf("auto: null p < 0.05 in %.4f of %d tests, want 0.05 ± %.4f", auto, n, half)
			}
			if c.ar1Out && math.Abs(ar1-0.05) <= half {
				t.Errorf("ar1: null p < 0.05 in %.4f of %d tests, inside 0.05 ± %.4f; the test no longer shows what auto adds", ar1, n, half)
			}
			t.Logf("auto %.4f, ar1 %.4f of %d tests (99%% interval 0.05 ± %.4f)", auto, ar1, n, half)
		})
	}
}
