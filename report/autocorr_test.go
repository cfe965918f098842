package report

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/tessera-fmri/tessera/fit"
	"github.com/tessera-fmri/tessera/simulate"
)

// TestAutocorrelationTable: autocorrelation.csv has one row per fitted
// region and lag 1..min(10, volumes/5), the whitened values are the ones
// the Ljung-Box p of diagnostics.csv was computed from, and report.md names
// the models auto chose.
func TestAutocorrelationTable(t *testing.T) {
	nm, _ := fit.ParseNoise("auto")
	res := studyResult(t, simulate.Options{Subjects: 1, Runs: 2, Regions: 5, Volumes: 120, TR: 2, Seed: 3},
		fit.Options{SliceRef: 0.5, Highpass: 128, HRF: fit.HRFDoubleGamma, Noise: nm, Jobs: 1})
	dir := t.TempDir()
	out, err := NewOutput(filepath.Join(dir, "res"))
	if err != nil {
		t.Fatal(err)
	}
	if err := WriteTables(out, res); err != nil {
		t.Fatal(err)
	}
	if err := WriteMarkdown(out, res, ReportInfo{Study: "study.csv", Command: "tessera fit"}); err != nil {
		t.Fatal(err)
	}
	if err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(filepath.Join(dir, "res", "autocorrelation.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(rows[0], ","); got != "subject,session,run,region,lag,raw,whitened" {
		t.Fatalf("header %s", got)
	}
	K := fit.LjungBoxLag(120) // 10
	if len(rows)-1 != 2*5*K {
		t.Fatalf("%d rows, want %d (2 runs × 5 regions × %d lags)", len(rows)-1, 2*5*K, K)
	}
	for i, r := range rows[1:] {
		run := res.Runs[i/(5*K)]
		reg := run.Fit.Regions[(i/K)%5]
		lag, _ := strconv.Atoi(r[4])
		w, _ := strconv.ParseFloat(r[6], 64)
		if r[3] != reg.Region || lag != i%K+1 || w != reg.WhitenedACF[lag-1] {
			t.Fatalf("row %d: %v; want region %s lag %d whitened %v", i+2, r, reg.Region, i%K+1, reg.WhitenedACF[lag-1])
		}
		if lag == K {
			// Ljung-Box Q = n(n+2) sum ρ_k²/(n-k) from these values.
			q := 0.0
			for k, rho := range reg.WhitenedACF {
				q += rho * rho / float64(120-k-1)
			}
			q *= 120 * 122
			wq, _ := fit.LjungBox(whitened(t, run, (i/K)%5), K, len(reg.AR)+len(reg.MA))
			if math.Abs(q-wq) > 1e-9*wq {
				t.Errorf("row %d: Ljung-Box from the table %.12g, from the residuals %.12g", i+2, q, wq)
			}
		}
	}
	md, err := os.ReadFile(filepath.Join(dir, "res", "report.md"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(md), "- Noise: `auto` (per region, the AIC choice among AR(1..Pmax)") || !strings.Contains(string(md), "chosen: ") {
		t.Errorf("report.md does not describe auto and its choices:\n%s", md)
	}
}

// whitened recomputes a region's whitened residuals from its estimates.
func whitened(t *testing.T, run *fit.RunResult, ri int) []float64 {
	t.Helper()
	ys, err := run.Plan.Signals()
	if err != nil {
		t.Fatal(err)
	}
	reg := run.Fit.Regions[ri]
	x := run.Plan.Design.X
	n, k := x.Dims()
	r := make([]float64, n)
	for i := 0; i < n; i++ {
		s := ys[ri][i]
		for j := 0; j < k; j++ {
			s -= x.At(i, j) * reg.Beta[j]
		}
		r[i] = s
	}
	wh, err := reg.NoiseWhitener(n)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float64, n)
	wh.Apply(out, r)
	return out
}

// TestLjungBoxAdvice: the advice names what to try for each model.
func TestLjungBoxAdvice(t *testing.T) {
	for _, c := range []struct {
		noise string
		pool  bool
		want  string
	}{
		{"ar1", false, "--noise auto"},
		{"none", false, "--noise auto"},
		{"auto", false, "confounds"},
		{"auto", true, "drop --noise-pool"},
	} {
		nm, _ := fit.ParseNoise(c.noise)
		nm.Pool = c.pool
		if got := ljungBoxAdvice(nm); !strings.Contains(got, c.want) {
			t.Errorf("%s pool %v: %q lacks %q", c.noise, c.pool, got, c.want)
		}
	}
}
