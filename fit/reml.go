package fit

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// --noise arma: ARMA(1,1) by restricted maximum likelihood (Patterson and
// Thompson 1971; Harville 1977, JASA 72:320-338). With V = s² V_1 and s²
// profiled out, REML minimises the deviance
//
//	ℓ(φ, θ) = (n-k) log(y'P y) + log|V_1| + log|X'V_1^-1 X|,
//	P = V_1^-1 - V_1^-1 X (X'V_1^-1 X)^-1 X'V_1^-1,
//
// the criterion of nlme's gls(method = "REML") up to a constant (checked in
// TestARMAREMLAgainstNlme). y'Py is computed from the OLS residuals r_0
// (P X = 0, so y'Py = r_0'P r_0, which keeps the baseline out of the
// subtraction), log|V_1| from the pivots of the exact whitening
// (ARMAWhitener), and Q'V_1^-1 Q from the lagged cross-products where the
// fast path holds (log|X'V_1^-1X| = log|Q'V_1^-1Q| + 2 log|R|; the constant
// is dropped on both paths). The search is Nelder-Mead in φ = 0.99 tanh(x),
// θ = 0.99 tanh(y), from the Whittle estimate on the bias-corrected
// autocovariances of the OLS residuals.

// remlScratch holds one evaluation's work space.
type remlScratch struct {
	a, w, bq, tmp []float64
}

func (e *engine) newREMLScratch() *remlScratch {
	n, k := e.b.n, e.b.k
	return &remlScratch{a: make([]float64, k*k), w: make([]float64, n), bq: make([]float64, k), tmp: make([]float64, k)}
}

// designLogDet returns log|Q'V_1^-1Q| and its Cholesky factor in s.a (fast
// path), or ok = false when the fast path does not apply.
func (e *engine) designLogDet(p noiseParams, s *remlScratch) (pr precision, logDet float64, ok bool) {
	if !e.b.fast {
		return pr, 0, false
	}
	pr, ok = newPrecision(p, e.b.n)
	if !ok || !e.assemble(s.a, pr) || !cholesky(s.a, e.b.k) {
		return pr, 0, false
	}
	return pr, cholLogDet(s.a, e.b.k), true
}

// quadP returns r'P r given Q'V^-1Q's factor in s.a.
func (e *engine) quadP(pr precision, r []float64, s *remlScratch) float64 {
	n, k := e.b.n, e.b.k
	pr.apply(s.w, r)
	rv := vdot(r, s.w)
	for j := range s.bq {
		s.bq[j] = 0
	}
	for t := 0; t < n; t++ {
		wt := s.w[t]
		for j, q := range e.b.qrow(t) {
			s.bq[j] += wt * q
		}
	}
	copy(s.tmp, s.bq)
	cholSolve(s.a, k, s.tmp)
	return rv - vdot(s.bq, s.tmp)
}

// slowDeviance is the REML deviance by QR of the whitened design.
func (e *engine) slowDeviance(p noiseParams, rs [][]float64) float64 {
	n, k := e.b.n, e.b.k
	wh, err := NewARMAWhitener(p.ar[0], p.ma[0], n)
	if err != nil {
		return math.Inf(1)
	}
	xw := whitenDesign(e.d, wh)
	var qr mat.QR
	qr.Factorize(xw)
	var r mat.Dense
	qr.RTo(&r)
	logDet := 0.0
	for i := 0; i < k; i++ {
		logDet += 2 * math.Log(math.Abs(r.At(i, i)))
		logDet -= 2 * math.Log(math.Abs(e.b.r[i*k+i]))
	}
	lsq, err := NewLSQ(xw)
	if err != nil {
		return math.Inf(1)
	}
	dev := float64(len(rs)) * (wh.LogDet + logDet)
	rw := make([]float64, n)
	for _, r0 := range rs {
		wh.Apply(rw, r0)
		_, res := lsq.Solve(rw)
		dev += float64(n-k) * math.Log(vdot(res, res))
	}
	return dev
}

// remlDeviance is ℓ(φ, θ) summed over the residual series rs (one region,
// or every region of a run under --noise-pool, each with a variance of its
// own).
func (e *engine) remlDeviance(p noiseParams, rs [][]float64, s *remlScratch) float64 {
	n, k := e.b.n, e.b.k
	if !(math.Abs(p.ar[0]) < 1 && math.Abs(p.ma[0]) < 1) {
		return math.Inf(1)
	}
	pr, logDetA, ok := e.designLogDet(p, s)
	if !ok {
		return e.slowDeviance(p, rs)
	}
	wh, err := NewARMAWhitener(p.ar[0], p.ma[0], n)
	if err != nil {
		return math.Inf(1)
	}
	dev := float64(len(rs)) * (wh.LogDet + logDetA)
	for _, r := range rs {
		q := e.quadP(pr, r, s)
		if !(q > 0) {
			return math.Inf(1)
		}
		dev += float64(n-k) * math.Log(q)
	}
	return dev
}

// remlXTol is where the REML search stops: simplex vertices within 1e-6 in
// the tanh coordinates put φ and θ within about 1e-6 of the optimum, a
// thousandth of the 1e-3 to which they are checked against nlme, and move
// the standard errors by far less than its 1e-4.
const remlXTol = 1e-6

// remlFit minimises the deviance from start; it returns the estimate and
// the number of optimiser iterations.
func (e *engine) remlFit(start noiseParams, rs [][]float64) (modelChoice, int) {
	s := e.newREMLScratch()
	clamp := func(v float64) float64 { return math.Max(-armaLimit+1e-9, math.Min(armaLimit-1e-9, v)) }
	x0 := []float64{math.Atanh(clamp(start.ar[0]) / armaLimit), math.Atanh(clamp(start.ma[0]) / armaLimit)}
	evals := 0
	f := func(x []float64) float64 {
		evals++
		p := noiseParams{ar: []float64{armaLimit * math.Tanh(x[0])}, ma: []float64{armaLimit * math.Tanh(x[1])}}
		return e.remlDeviance(p, rs, s)
	}
	x, _ := nelderMead(f, x0, 0.2, 1e-13, remlXTol, 500)
	p := noiseParams{ar: []float64{armaLimit * math.Tanh(x[0])}, ma: []float64{armaLimit * math.Tanh(x[1])}}
	shrunk := math.Abs(p.ar[0]) > armaLimit-1e-6 || math.Abs(p.ma[0]) > armaLimit-1e-6
	return modelChoice{p: p, shrunk: shrunk}, evals
}

// remlRegions fits ARMA(1,1) by REML in every region, then the GLS.
func (e *engine) remlRegions(ws []*regionWork) error {
	for _, w := range ws {
		var evals int
		w.next, evals = e.remlFit(w.next.p, [][]float64{w.r0})
		w.passes = evals
	}
	return e.gls(ws, func(w *regionWork) modelChoice { return w.next })
}

// remlPooled fits one ARMA(1,1) by REML to all regions of the run.
func (e *engine) remlPooled(ws []*regionWork, start modelChoice) error {
	rs := make([][]float64, len(ws))
	for i, w := range ws {
		rs[i] = w.r0
	}
	m, evals := e.remlFit(start.p, rs)
	for _, w := range ws {
		w.passes = evals
	}
	return e.glsShared(ws, m)
}
