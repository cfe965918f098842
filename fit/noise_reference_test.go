package fit

import (
	"math"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// References for the noise models from R (testdata/reference/noise/noise.R,
// see its README): stats::ar.yw, ar.mle and ar(aic = TRUE) on committed
// series, nlme::gls with corARMA(p = 1, q = 1) by REML on a committed
// regression.

const (
	// tolYW: Levinson-Durbin here and R's eureka (Fortran) evaluate the
	// same recursion on the same autocovariances in double precision.
	tolYW = 1e-10
	// tolAIC: AIC values are n log σ² with n a few hundred; the
	// rounding of σ² to 1e-15 relative gives about 1e-12 absolute.
	tolAIC = 1e-9
	// tolMLE: the bound for estimated parameters; arima0's
	// optimiser (BFGS, relative tolerance 1e-8 on the likelihood) stops
	// within about 1e-4 of the optimum.
	tolMLE = 1e-3
	// tolREMLParam and tolREMLFit: the bounds against nlme, for
	// φ and θ (absolute) and for the estimates and standard errors
	// (relative).
	tolREMLParam = 1e-3
	tolREMLFit   = 1e-4
)

func noiseRef(name string) string { return refPath("noise/" + name) }

// committedSeries reads noise/series.csv by column.
func committedSeries(t *testing.T) map[string][]float64 {
	t.Helper()
	head, rows := readCSV(t, noiseRef("series.csv"))
	out := map[string][]float64{}
	for _, r := range rows {
		for j, h := range head {
			out[h] = append(out[h], atof(t, r[j]))
		}
	}
	return out
}

// sampleAutocovariance is R's acf(type = "covariance", demean = TRUE):
// c_k = sum_t (x_t - x̄)(x_{t+k} - x̄) / n.
func sampleAutocovariance(x []float64, lags int) (c []float64, mean float64) {
	n := len(x)
	for _, v := range x {
		mean += v
	}
	mean /= float64(n)
	d := make([]float64, n)
	for i, v := range x {
		d[i] = v - mean
	}
	for k := 0; k <= lags; k++ {
		c = append(c, vdot(d[:n-k], d[k:])/float64(n))
	}
	return c, mean
}

// arReference reads ar_yw.csv or ar_mle.csv: per series and order the
// coefficients, var_pred, x_mean and whether the fit converged.
type arRef struct {
	a              []float64
	varPred, xMean float64
	converged      bool
	series         string
	order          int
}

func readARRef(t *testing.T, file string) []arRef {
	t.Helper()
	_, rows := readCSV(t, noiseRef(file))
	var out []arRef
	idx := map[string]int{}
	for _, r := range rows {
		key := r[0] + "/" + r[1]
		i, ok := idx[key]
		if !ok {
			p, _ := strconv.Atoi(r[1])
			out = append(out, arRef{series: r[0], order: p, a: make([]float64, p), converged: r[4] == "1"})
			i = len(out) - 1
			idx[key] = i
		}
		v := atof(t, r[3])
		switch term := r[2]; {
		case term == "var_pred":
			out[i].varPred = v
		case term == "x_mean":
			out[i].xMean = v
		default:
			lag, _ := strconv.Atoi(term[1:])
			out[i].a[lag-1] = v
		}
	}
	return out
}

// TestYuleWalkerAgainstR: Levinson-Durbin on the sample autocovariances
// gives R's ar.yw coefficients, and its innovation variance times
// n/(n - (p+1)) R's var.pred.
func TestYuleWalkerAgainstR(t *testing.T) {
	series := committedSeries(t)
	refs := readARRef(t, "ar_yw.csv")
	if len(refs) != 12 {
		t.Fatalf("%d ar.yw fits, want 12", len(refs))
	}
	for _, ref := range refs {
		x := series[ref.series]
		n := len(x)
		c, mean := sampleAutocovariance(x, ref.order)
		coefs, vars := levinson(c, ref.order)
		if len(coefs) <= ref.order {
			t.Fatalf("%s order %d: Levinson stopped at order %d", ref.series, ref.order, len(coefs)-1)
		}
		for i, a := range coefs[ref.order] {
			if e := relErr(a, ref.a[i]); e > tolYW {
				t.Errorf("%s AR(%d) a%d: %.17g, R %.17g", ref.series, ref.order, i+1, a, ref.a[i])
			}
		}
		vp := vars[ref.order] * float64(n) / float64(n-ref.order-1)
		if e := relErr(vp, ref.varPred); e > tolYW {
			t.Errorf("%s AR(%d) var.pred %.17g, R %.17g", ref.series, ref.order, vp, ref.varPred)
		}
		if e := relErr(mean, ref.xMean); e > tolYW {
			t.Errorf("%s mean %.17g, R %.17g", ref.series, mean, ref.xMean)
		}
	}
}

// TestOrderSelectionAgainstR: the criterion auto uses, N log σ² + 2q
// (modelChoice.aic) with σ² from Levinson-Durbin, applied as R applies it
// (sample autocovariances, N = n), gives R's AIC differences for orders
// 0..8 and R's choice.
func TestOrderSelectionAgainstR(t *testing.T) {
	series := committedSeries(t)
	_, rows := readCSV(t, noiseRef("ar_aic.csv"))
	bySeries := map[string][][]string{}
	for _, r := range rows {
		bySeries[r[0]] = append(bySeries[r[0]], r)
	}
	if len(bySeries) != 3 {
		t.Fatalf("%d series in ar_aic.csv", len(bySeries))
	}
	for name, rs := range bySeries {
		x := series[name]
		c, _ := sampleAutocovariance(x, 8)
		coefs, vars := levinson(c, 8)
		if len(vars) != 9 {
			t.Fatalf("%s: Levinson stopped at order %d", name, len(vars)-1)
		}
		aic := make([]float64, 9)
		best := 0
		for p := range aic {
			aic[p] = modelChoice{p: noiseParams{ar: coefs[p]}, sigma2: vars[p]}.aic(len(x))
			if aic[p] < aic[best] {
				best = p
			}
		}
		for _, r := range rs {
			p, _ := strconv.Atoi(r[1])
			if d := math.Abs((aic[p] - aic[best]) - atof(t, r[2])); d > tolAIC {
				t.Errorf("%s order %d: AIC difference %.12g, R %s", name, p, aic[p]-aic[best], r[2])
			}
			if (r[3] == "1") != (p == best) {
				t.Errorf("%s: chose order %d, R's row %d has chosen = %s", name, best, p, r[3])
			}
		}
	}
}

// arLogLik is the exact Gaussian log-likelihood of x under AR(a) with mean
// mu (NaN: profiled, its GLS estimate) and the innovation variance
// profiled: -2 log L = n log(2π RSS_w/n) + n + log|V_1|, from the exact
// whitening (Whitener) and its log-determinant. It returns the variance and
// the mean used.
func arLogLik(x, a []float64, mu float64) (ll, s2, m float64, ok bool) {
	w, err := NewWhitener(a)
	if err != nil {
		return math.Inf(-1), 0, 0, false
	}
	n := len(x)
	one := make([]float64, n)
	for i := range one {
		one[i] = 1
	}
	wx, w1 := make([]float64, n), make([]float64, n)
	w.Apply(wx, x)
	w.Apply(w1, one)
	m = mu
	if math.IsNaN(mu) {
		m = vdot(w1, wx) / vdot(w1, w1)
	}
	rss := 0.0
	for i := range wx {
		d := wx[i] - m*w1[i]
		rss += d * d
	}
	s2 = rss / float64(n)
	ll = -0.5 * (float64(n)*math.Log(2*math.Pi*s2) + float64(n) + w.LogDet)
	return ll, s2, m, true
}

// tolMLExact: R's arima(method = "ML") optimised to a relative tolerance of
// 1e-14 on the likelihood and this Nelder-Mead to 1e-15 reach the same
// maximum; a flat likelihood leaves the coefficients agreeing to about
// 1e-5, and the likelihood itself, a sum of a few hundred terms, to 1e-10.
const (
	tolMLExact   = 1e-4
	tolLogLikRel = 1e-10
)

// TestARMaxLikelihoodAgainstR: the exact likelihood built from the
// whitening (arLogLik) equals R's exact likelihood (stats::arima, method =
// "ML") at ar.mle's estimates; maximised over stationary AR(p) (Nelder-Mead
// in the tanh of the partial autocorrelations) it reaches arima's maximum;
// and the estimates agree with ar.mle to the 1e-3 wherever ar.mle
// itself lies within 1e-3 of that maximum (its arima0 switches to fast
// recursions once the Kalman gain settles to 0.01 and stops early), while
// elsewhere the likelihood here is at least ar.mle's.
func TestARMaxLikelihoodAgainstR(t *testing.T) {
	series := committedSeries(t)
	refs := readARRef(t, "ar_mle.csv")
	_, agreeRows := readCSV(t, noiseRef("ar_mle.csv"))
	agrees := map[string]bool{}
	for _, r := range agreeRows {
		agrees[r[0]+"/"+r[1]] = r[5] == "1"
	}
	_, exRows := readCSV(t, noiseRef("ar_ml_exact.csv"))
	exact := map[string]map[string]float64{}
	for _, r := range exRows {
		key := r[0] + "/" + r[1]
		if exact[key] == nil {
			exact[key] = map[string]float64{}
		}
		exact[key][r[2]] = atof(t, r[3])
	}
	checkedMLE := 0
	for _, ref := range refs {
		key := ref.series + "/" + strconv.Itoa(ref.order)
		ex := exact[key]
		x := series[ref.series]
		if ll, _, _, _ := arLogLik(x, ref.a, ref.xMean); relErr(ll, ex["loglik_at_ar_mle"]) > tolLogLikRel {
			t.Errorf("%s: log-likelihood at ar.mle's estimates %.12g, R's arima %.12g", key, ll, ex["loglik_at_ar_mle"])
		}
		c, _ := sampleAutocovariance(x, ref.order)
		coefs, _ := levinson(c, ref.order)
		start := make([]float64, ref.order)
		for p := 1; p <= ref.order; p++ {
			start[p-1] = math.Atanh(coefs[p][p-1])
		}
		toAR := func(u []float64) []float64 {
			kappa := make([]float64, len(u))
			for i, v := range u {
				kappa[i] = math.Tanh(v)
			}
			return reflectionToAR(kappa)
		}
		f := func(u []float64) float64 {
			ll, _, _, ok := arLogLik(x, toAR(u), math.NaN())
			if !ok {
				return math.Inf(1)
			}
			return -ll
		}
		u, _ := nelderMead(f, start, 0.1, 1e-15, 1e-9, 4000)
		a := toAR(u)
		ll, s2, mu, _ := arLogLik(x, a, math.NaN())
		for i := range a {
			if d := math.Abs(a[i] - ex["a"+strconv.Itoa(i+1)]); d > tolMLExact {
				t.Errorf("%s a%d: %.7f, R's arima ML %.7f", key, i+1, a[i], ex["a"+strconv.Itoa(i+1)])
			}
		}
		if d := math.Abs(mu - ex["x_mean"]); d > tolMLExact {
			t.Errorf("%s mean %.7f, R's arima ML %.7f", key, mu, ex["x_mean"])
		}
		if e := relErr(s2, ex["sigma2"]); e > tolMLExact {
			t.Errorf("%s innovation variance %.7f, R's arima ML %.7f", key, s2, ex["sigma2"])
		}
		if ll < ex["loglik"]-1e-8 {
			t.Errorf("%s: maximum log-likelihood %.10f below R's arima ML %.10f", key, ll, ex["loglik"])
		}
		if ll < ex["loglik_at_ar_mle"]-1e-8 {
			t.Errorf("%s: maximum log-likelihood %.10f below ar.mle's %.10f", key, ll, ex["loglik_at_ar_mle"])
		}
		if ref.converged && agrees[key] {
			for i := range a {
				if d := math.Abs(a[i] - ref.a[i]); d > tolMLE {
					t.Errorf("%s a%d: %.6f, ar.mle %.6f", key, i+1, a[i], ref.a[i])
				}
			}
			if e := relErr(s2, ref.varPred); e > tolMLE {
				t.Errorf("%s innovation variance %.6f, ar.mle %.6f", key, s2, ref.varPred)
			}
			checkedMLE++
		}
	}
	if checkedMLE < 8 {
		t.Errorf("only %d ar.mle fits compared directly, want at least 8 of 12", checkedMLE)
	}
}

// reflectionToAR maps partial autocorrelations to AR coefficients (the
// Levinson-Durbin step-up recursion).
func reflectionToAR(kappa []float64) []float64 {
	var a []float64
	for k, kp := range kappa {
		next := make([]float64, k+1)
		next[k] = kp
		for i := 0; i < k; i++ {
			next[i] = a[i] - kp*a[k-1-i]
		}
		a = next
	}
	return a
}

// TestARMAREMLAgainstNlme: --noise arma on a committed regression with
// AR(1) plus white noise gives nlme's REML φ and θ, and its GLS estimates
// and standard errors.
func TestARMAREMLAgainstNlme(t *testing.T) {
	head, rows := readCSV(t, noiseRef("arma_input.csv"))
	n, k := len(rows), len(head)-1
	x := mat.NewDense(n, k, nil)
	y := make([]float64, n)
	for i, r := range rows {
		y[i] = atof(t, r[0])
		for j := 0; j < k; j++ {
			x.Set(i, j, atof(t, r[j+1]))
		}
	}
	d := &Design{X: x}
	for _, h := range head[1:] {
		d.Terms = append(d.Terms, Term{Name: h})
	}
	noise, _ := ParseNoise("arma")
	rf, err := FitRun(d, []string{"y"}, [][]float64{y}, noise)
	if err != nil {
		t.Fatal(err)
	}
	reg := rf.Regions[0]
	_, par := readCSV(t, noiseRef("arma_reml.csv"))
	phi, theta := atof(t, par[0][0]), atof(t, par[0][1])
	if math.Abs(reg.AR[0]-phi) > tolREMLParam || math.Abs(reg.MA[0]-theta) > tolREMLParam {
		t.Errorf("φ, θ = %.6f, %.6f; nlme %.6f, %.6f", reg.AR[0], reg.MA[0], phi, theta)
	}
	_, coef := readCSV(t, noiseRef("arma_reml_coef.csv"))
	for j, r := range coef {
		if r[0] != head[j+1] {
			t.Fatalf("term %s vs %s", r[0], head[j+1])
		}
		if e := relErr(reg.Beta[j], atof(t, r[1])); e > tolREMLFit {
			t.Errorf("%s estimate %.10g, nlme %s (rel %.2g)", r[0], reg.Beta[j], r[1], e)
		}
		if e := relErr(reg.StdError[j], atof(t, r[2])); e > tolREMLFit {
			t.Errorf("%s std_error %.10g, nlme %s (rel %.2g)", r[0], reg.StdError[j], r[2], e)
		}
	}
	t.Logf("φ %.7f θ %.7f (nlme %.7f %.7f)", reg.AR[0], reg.MA[0], phi, theta)
}
