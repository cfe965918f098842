package fit

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/tessera-fmri/tessera/roi"
)

// Tolerances of the noise-model unit tests.
const (
	// tolPrecision: the precision structure drops ARMA lags below
	// precisionTol (1e-11) of v_0; the dense inverse it is compared with
	// loses cond(V)·eps, below 1e-12 for these models.
	tolPrecision = 1e-10
	// tolWhiten: T V T' = I and log|V| from the whitening against dense
	// Cholesky, both rounding-level for n = 60 (cond(V) below 1e3).
	tolWhiten = 1e-10
	// tolTrace: the same trace by two routes (explicit n×n matrices and the
	// lagged cross-products of Q), summing a few thousand terms.
	tolTrace = 1e-10
	// tolFastPath: normal equations in the orthonormal basis Q (fast
	// path) against QR of the whitened design (per-region path). Both are
	// backward stable with error about cond(Q'V^-1Q)·eps (below 1e3·eps
	// here) relative to the estimate, times cond(R) for β (below 30): far
	// below 1e-9, which leaves room for the lags dropped at precisionTol.
	tolFastPath = 1e-9
)

var precisionModels = []struct {
	name string
	p    noiseParams
}{
	{"ar1", noiseParams{ar: []float64{0.6}}},
	{"ar3", noiseParams{ar: []float64{0.5, -0.2, 0.1}}},
	{"arma white", noiseParams{ar: []float64{0.6}, ma: []float64{-0.32}}},
	{"arma", noiseParams{ar: []float64{0.3}, ma: []float64{0.5}}},
	{"arma negative", noiseParams{ar: []float64{-0.4}, ma: []float64{0.2}}},
	{"arma theta 0", noiseParams{ar: []float64{0.7}, ma: []float64{0}}},
}

func denseCov(p noiseParams, n int) *mat.SymDense {
	g := p.autocovariance(n - 1)
	v := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			v.SetSym(i, j, g[j-i])
		}
	}
	return v
}

// TestPrecisionStructure: V^-1 = Toep(v) + corner terms (precision) equals
// the dense inverse of the Toeplitz covariance, for AR and ARMA models.
func TestPrecisionStructure(t *testing.T) {
	const n = 60
	for _, c := range precisionModels {
		t.Run(c.name, func(t *testing.T) {
			var inv mat.Dense
			if err := inv.Inverse(denseCov(c.p, n)); err != nil {
				t.Fatal(err)
			}
			pr, ok := newPrecision(c.p, n)
			if !ok {
				t.Fatal("no precision structure")
			}
			e := make([]float64, n)
			col := make([]float64, n)
			big, worst := 0.0, 0.0
			for j := 0; j < n; j++ {
				for i := range e {
					e[i] = 0
				}
				e[j] = 1
				pr.apply(col, e)
				for i := 0; i < n; i++ {
					big = math.Max(big, math.Abs(inv.At(i, j)))
					worst = math.Max(worst, math.Abs(col[i]-inv.At(i, j)))
				}
			}
			if worst > tolPrecision*big {
				t.Errorf("largest difference from the dense inverse %.3g (largest entry %.3g)", worst, big)
			}
			x := make([]float64, n)
			for i := range x {
				x[i] = math.Sin(float64(i)) + 0.1*float64(i)
			}
			pr.apply(col, x)
			want := vdot(x, col)
			if got := pr.quadraticScratch(x, make([]float64, n)); math.Abs(got-want) > tolPrecision*math.Abs(want) {
				t.Errorf("quadratic form %.15g, want %.15g", got, want)
			}
			if got := pr.quadratic(x); math.Abs(got-want) > tolPrecision*math.Abs(want) {
				t.Errorf("truncated quadratic form %.15g, want %.15g", got, want)
			}
		})
	}
}

// TestWhiteningExact: the whitening T of every model gives T V T' = I and
// its log-determinant is log|V|.
func TestWhiteningExact(t *testing.T) {
	const n = 60
	for _, c := range precisionModels {
		t.Run(c.name, func(t *testing.T) {
			v := denseCov(c.p, n)
			wh, g0, err := c.p.whitener(n)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(g0-v.At(0, 0)) > tolWhiten*v.At(0, 0) {
				t.Errorf("g0 %.15g, want %.15g", g0, v.At(0, 0))
			}
			tm := mat.NewDense(n, n, nil)
			e, col := make([]float64, n), make([]float64, n)
			for j := 0; j < n; j++ {
				for i := range e {
					e[i] = 0
				}
				e[j] = 1
				wh.Apply(col, e)
				tm.SetCol(j, col)
			}
			var tv, tvt mat.Dense
			tv.Mul(tm, v)
			tvt.Mul(&tv, tm.T())
			for i := 0; i < n; i++ {
				for j := 0; j < n; j++ {
					want := 0.0
					if i == j {
						want = 1
					}
					if d := math.Abs(tvt.At(i, j) - want); d > tolWhiten {
						t.Fatalf("T V T' [%d,%d] = %.15g, want %g", i, j, tvt.At(i, j), want)
					}
				}
			}
			var ch mat.Cholesky
			if !ch.Factorize(v) {
				t.Fatal("V not positive definite")
			}
			want := ch.LogDet()
			var got float64
			switch w := wh.(type) {
			case *Whitener:
				got = w.LogDet
			case *ARMAWhitener:
				got = w.LogDet
			}
			if math.Abs(got-want) > tolWhiten*math.Max(1, math.Abs(want)) {
				t.Errorf("log|V| %.15g, want %.15g", got, want)
			}
		})
	}
}

// testDesign is a small block design with drift terms and an intercept.
func testDesign(t *testing.T, n int, tr float64) *Design {
	t.Helper()
	var evs []roi.Event
	for on := 8.0; on+16 < float64(n)*tr-8; on += 30 {
		evs = append(evs, roi.Event{Onset: on, Duration: 16, Amplitude: 1, Condition: "a"})
	}
	d, err := BuildDesign(DesignSpec{Volumes: n, TR: tr, SliceRef: 0.5, Highpass: 128, HRF: HRFDoubleGamma, Events: evs})
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// residualMaker returns R = I - X(X'X)^-1X' explicitly.
func residualMaker(x *mat.Dense) *mat.Dense {
	n, _ := x.Dims()
	var xtx, inv, h mat.Dense
	xtx.Mul(x.T(), x)
	inv.Inverse(&xtx)
	h.Mul(x, &inv)
	var hx mat.Dense
	hx.Mul(&h, x.T())
	r := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := -hx.At(i, j)
			if i == j {
				v++
			}
			r.Set(i, j, v)
		}
	}
	return r
}

// lagMatrix is D_j: ½ on the ±j diagonals (I for j = 0).
func lagMatrix(n, j int) *mat.Dense {
	d := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		if j == 0 {
			d.Set(i, i, 1)
			continue
		}
		if i+j < n {
			d.Set(i, i+j, 0.5)
			d.Set(i+j, i, 0.5)
		}
	}
	return d
}

func trace(m *mat.Dense) float64 {
	n, _ := m.Dims()
	s := 0.0
	for i := 0; i < n; i++ {
		s += m.At(i, i)
	}
	return s
}

// TestOLSCorrectionTraces: the first-pass correction inverts M_jk = w_k
// tr(R D_j R D_k), computed from the lagged cross-products of Q; checked
// against explicit n×n products.
func TestOLSCorrectionTraces(t *testing.T) {
	d := testDesign(t, 48, 2)
	n, _ := d.X.Dims()
	b, err := newRunBasis(d.X)
	if err != nil {
		t.Fatal(err)
	}
	const L = 5
	c, err := b.olsCorrection(L)
	if err != nil {
		t.Fatal(err)
	}
	r := residualMaker(d.X)
	m := mat.NewDense(L+1, L+1, nil)
	for j := 0; j <= L; j++ {
		var rdj mat.Dense
		rdj.Mul(r, lagMatrix(n, j))
		for k := 0; k <= L; k++ {
			var a, bb mat.Dense
			a.Mul(&rdj, r)
			bb.Mul(&a, lagMatrix(n, k))
			w := 2.0
			if k == 0 {
				w = 1
			}
			m.Set(j, k, w*trace(&bb))
		}
	}
	// M · minv = I.
	for i := 0; i <= L; i++ {
		for j := 0; j <= L; j++ {
			s := 0.0
			for p := 0; p <= L; p++ {
				s += m.At(i, p) * c.minv[p*(L+1)+j]
			}
			want := 0.0
			if i == j {
				want = 1
			}
			if math.Abs(s-want) > tolTrace {
				t.Fatalf("(M · M^-1)[%d,%d] = %.15g, want %g", i, j, s, want)
			}
		}
	}
}

// TestGLSCorrectionExact: for GLS residuals under the noise's own
// covariance, the expected lag sums tr(D_j E[rr']) with E[rr'] = V -
// X(X'V^-1X)^-1X' (explicit n×n) corrected by correctGLS give back the
// model's autocovariances exactly.
func TestGLSCorrectionExact(t *testing.T) {
	d := testDesign(t, 48, 2)
	n, k := d.X.Dims()
	b, err := newRunBasis(d.X)
	if err != nil {
		t.Fatal(err)
	}
	const L = 6
	b.ensureLags(L)
	for _, c := range precisionModels {
		v := denseCov(c.p, n)
		var vinv mat.Dense
		if err := vinv.Inverse(v); err != nil {
			t.Fatal(err)
		}
		var xv, a, ainv, xa, xax mat.Dense
		xv.Mul(d.X.T(), &vinv)
		a.Mul(&xv, d.X)
		ainv.Inverse(&a)
		xa.Mul(d.X, &ainv)
		xax.Mul(&xa, d.X.T())
		err := mat.NewDense(n, n, nil)
		err.Sub(v, &xax)
		lagsum := make([]float64, L+1)
		for j := 0; j <= L; j++ {
			var dj mat.Dense
			dj.Mul(lagMatrix(n, j), err)
			lagsum[j] = trace(&dj)
		}
		// (Q'V^-1Q)^-1 = R (X'V^-1X)^-1 R'.
		e := &engine{d: d, b: b}
		aq := make([]float64, k*k)
		sym := mat.NewSymDense(k, nil)
		for i := 0; i < k; i++ {
			for j := i; j < k; j++ {
				sym.SetSym(i, j, ainv.At(i, j))
			}
		}
		e.toQBasis(sym, aq)
		g := b.correctGLS(nil, lagsum, aq, 1)
		want := c.p.autocovariance(L)
		for j := range want {
			if math.Abs(g[j]-want[j]) > tolTrace*want[0] {
				t.Errorf("%s lag %d: corrected %.15g, model %.15g", c.name, j, g[j], want[j])
			}
		}
	}
}

// TestFastPathAgreesWithQR: GLS by the lagged cross-products of Q (and by
// whitening Q, for an MA coefficient beyond the fast path) gives the
// estimates and standard errors of QR of the whitened design.
func TestFastPathAgreesWithQR(t *testing.T) {
	d := testDesign(t, 200, 2)
	n, k := d.X.Dims()
	rng := rand.New(rand.NewPCG(31, 32))
	y := make([]float64, n)
	for i := range y {
		y[i] = 500 + 3*d.X.At(i, 0) + 2*rng.NormFloat64()
	}
	models := append([]struct {
		name string
		p    noiseParams
	}{{"arma theta 0.8", noiseParams{ar: []float64{0.9}, ma: []float64{-0.8}}}}, precisionModels...)
	for _, c := range models {
		t.Run(c.name, func(t *testing.T) {
			fit := func(fast bool) RegionFit {
				b, err := newRunBasis(d.X)
				if err != nil {
					t.Fatal(err)
				}
				b.fast = fast
				e := &engine{d: d, b: b, df: n - k}
				w := &regionWork{y: y, tss: 1}
				e.start([]*regionWork{w})
				if err := e.gls([]*regionWork{w}, func(*regionWork) modelChoice { return modelChoice{p: c.p} }); err != nil {
					t.Fatal(err)
				}
				if fast && w.slowBeta != nil {
					t.Fatal("fast path not taken")
				}
				var out RegionFit
				e.finish(w, &out)
				return out
			}
			f, s := fit(true), fit(false)
			for j := 0; j < k; j++ {
				if e := relErr(f.Beta[j], s.Beta[j]); e > tolFastPath {
					t.Errorf("term %d estimate %.15g vs QR %.15g (rel %.2g)", j, f.Beta[j], s.Beta[j], e)
				}
				if e := relErr(f.StdError[j], s.StdError[j]); e > tolFastPath {
					t.Errorf("term %d std_error %.15g vs QR %.15g (rel %.2g)", j, f.StdError[j], s.StdError[j], e)
				}
			}
			if e := relErr(f.Sigma, s.Sigma); e > tolFastPath {
				t.Errorf("sigma %.15g vs QR %.15g", f.Sigma, s.Sigma)
			}
		})
	}
}

// TestWhittleRecoversModels: on a model's own autocovariances the Whittle
// fits recover it (σ² = 1, the innovation variance).
func TestWhittleRecoversModels(t *testing.T) {
	const tol = 1e-6 // Brent to about 1.5e-8 in θ (brentMin); φ*(θ) exact
	for _, c := range precisionModels {
		g := c.p.autocovariance(16)
		if c.p.isARMA() {
			phi, th, v, ok := fitARMAWhittle(g)
			// The geometric lags beyond 16 are missing from σ²: the
			// minimum moves by about |θ|^16 |v_1|, below 1e-8 here.
			if !ok || math.Abs(phi-c.p.ar[0]) > tol || math.Abs(th-c.p.ma[0]) > tol || math.Abs(v-1) > tol {
				t.Errorf("%s: Whittle φ %.8f θ %.8f σ² %.8f, want %v %v 1", c.name, phi, th, v, c.p.ar, c.p.ma)
			}
			continue
		}
		coefs, vars := levinson(g, len(c.p.ar))
		for i, a := range coefs[len(c.p.ar)] {
			if math.Abs(a-c.p.ar[i]) > 1e-12 {
				t.Errorf("%s: Levinson a%d %.15g, want %g", c.name, i+1, a, c.p.ar[i])
			}
		}
		if math.Abs(vars[len(c.p.ar)]-1) > 1e-12 {
			t.Errorf("%s: innovation variance %.15g, want 1", c.name, vars[len(c.p.ar)])
		}
	}
}

// TestARMAWhiteShare: AR(1) coefficient ρ plus white noise of share s is
// the ARMA(1,1) with φ = ρ and θ solving θ/(1+θ²) = -ρ s / ((1-s)(1-ρ²) +
// (1+ρ²) s) (the MA(1) of the filtered sum); its white share reads back.
func TestARMAWhiteShare(t *testing.T) {
	for _, c := range []struct{ rho, s float64 }{{0.6, 0.5}, {0.2, 0.9}, {0.9, 0.1}, {-0.5, 0.3}} {
		// Variance of the AR part 1-s, so its innovation variance is
		// (1-s)(1-ρ²).
		q := -c.rho * c.s / ((1-c.s)*(1-c.rho*c.rho) + (1+c.rho*c.rho)*c.s)
		th := (1 - math.Sqrt(1-4*q*q)) / (2 * q)
		got, ok := ARMAWhiteShare(c.rho, th)
		if !ok || math.Abs(got-c.s) > 1e-12 {
			t.Errorf("ρ %g share %g: θ %.6f reads back %.15g (ok %v)", c.rho, c.s, th, got, ok)
		}
	}
	if _, ok := ARMAWhiteShare(0.5, 0.3); ok {
		t.Error("ARMA(0.5, 0.3) read as AR(1) plus white noise")
	}
}

// TestAutoMaxOrder: Pmax spans about 7 s, between 1 and 8.
func TestAutoMaxOrder(t *testing.T) {
	for _, c := range []struct {
		tr   float64
		want int
	}{{0.5, 8}, {0.8, 8}, {1, 7}, {1.5, 5}, {2, 4}, {2.5, 3}, {3, 2}, {5, 1}, {10, 1}} {
		if got := AutoMaxOrder(c.tr); got != c.want {
			t.Errorf("TR %g: Pmax %d, want %d", c.tr, got, c.want)
		}
	}
}

// TestParseNoise: every spelling of --noise, auto as the default.
func TestParseNoise(t *testing.T) {
	for _, c := range []struct {
		in    string
		kind  NoiseKind
		order int
	}{{"none", NoiseOLS, 0}, {"ar1", NoiseAR, 1}, {"ar:3", NoiseAR, 3}, {"ar:8", NoiseAR, 8}, {"arma", NoiseARMA, 0}, {"auto", NoiseAuto, 0}, {"", NoiseAuto, 0}} {
		m, err := ParseNoise(c.in)
		if err != nil || m.Kind != c.kind || m.Order != c.order {
			t.Errorf("%q: %+v, %v", c.in, m, err)
		}
	}
	for _, bad := range []string{"ar:0", "ar:9", "ar2", "AR1", "arma:2"} {
		if _, err := ParseNoise(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
	if DefaultNoise != "auto" {
		t.Errorf("default %q", DefaultNoise)
	}
}

// TestNoisePool: --noise-pool fits one model for the run (every region the
// same coefficients, scope "run"), and the shared GLS equals the
// per-region GLS under that model.
func TestNoisePool(t *testing.T) {
	d := testDesign(t, 240, 2)
	n, k := d.X.Dims()
	rng := rand.New(rand.NewPCG(5, 6))
	var ys [][]float64
	var names []string
	for r := 0; r < 12; r++ {
		y := make([]float64, n)
		e := 0.0
		for i := range y {
			e = 0.5*e + rng.NormFloat64()
			y[i] = 300 + float64(r) + e + rng.NormFloat64()
		}
		ys = append(ys, y)
		names = append(names, strconv.Itoa(r))
	}
	for _, name := range []string{"auto", "ar:2", "arma"} {
		t.Run(name, func(t *testing.T) {
			nm, _ := ParseNoise(name)
			nm.Pool = true
			rf, err := FitRun(d, names, ys, nm.ForTR(2))
			if err != nil {
				t.Fatal(err)
			}
			first := rf.Regions[0]
			p := noiseParams{ar: first.AR, ma: first.MA}
			if p.count() == 0 {
				t.Fatal("no noise model")
			}
			b, _ := newRunBasis(d.X)
			e := &engine{d: d, b: b, df: n - k}
			var ws []*regionWork
			for i := range ys {
				ws = append(ws, &regionWork{idx: i, y: ys[i], tss: 1})
			}
			e.start(ws)
			if err := e.gls(ws, func(*regionWork) modelChoice { return modelChoice{p: p} }); err != nil {
				t.Fatal(err)
			}
			for i, reg := range rf.Regions {
				if reg.NoiseScope != "run" || fmt.Sprint(reg.AR, reg.MA) != fmt.Sprint(first.AR, first.MA) {
					t.Fatalf("region %d: scope %q, model %v %v; want run, %v %v", i, reg.NoiseScope, reg.AR, reg.MA, first.AR, first.MA)
				}
				var one RegionFit
				e.finish(ws[i], &one)
				for j := range reg.Beta {
					if e := relErr(reg.Beta[j], one.Beta[j]); e > tolFastPath {
						t.Errorf("region %d term %d: pooled %.15g, per-region GLS %.15g", i, j, reg.Beta[j], one.Beta[j])
					}
					if e := relErr(reg.StdError[j], one.StdError[j]); e > tolFastPath {
						t.Errorf("region %d term %d se: pooled %.15g, per-region GLS %.15g", i, j, reg.StdError[j], one.StdError[j])
					}
				}
			}
		})
	}
}
