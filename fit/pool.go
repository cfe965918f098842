package fit

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// --noise-pool: one noise model per run. Each region's corrected
// autocovariances are scaled to autocorrelations and averaged over the
// regions (every region weighted equally); the models are fitted to the
// average, and for auto compared by the pooled criterion
//
//	AIC = sum_r N log σ²_r(model) + 2 q,
//
// the Whittle likelihood of the regions' error contrasts under a common
// correlation with a variance of their own. The GLS pieces that depend on
// the model alone (Q'V^-1Q, its factor and inverse, or the whitened design)
// are then computed once per run.

// poolChoose fits the spec's models to the regions' averaged
// autocorrelation and returns the best by the pooled criterion.
func poolChoose(gs [][]float64, spec estimSpec) modelChoice {
	L := len(gs[0]) - 1
	mean := make([]float64, L+1)
	cnt := 0
	for _, g := range gs {
		if !(g[0] > 0) {
			continue
		}
		for j := range mean {
			mean[j] += g[j] / g[0]
		}
		cnt++
	}
	if cnt == 0 {
		mean[0] = 1
		return fallbackModel(mean, spec)
	}
	for j := range mean {
		mean[j] /= float64(cnt)
	}
	cs := candidates(mean, spec)
	if len(cs) == 0 {
		return fallbackModel(mean, spec)
	}
	if len(cs) == 1 {
		return cs[0]
	}
	best, bestAIC := -1, math.Inf(1)
	for i, c := range cs {
		s := 0.0
		for _, g := range gs {
			if !(g[0] > 0) {
				continue
			}
			v := modelVariance(c.p, g)
			if !(v > 0) {
				s = math.Inf(1)
				break
			}
			s += float64(spec.df) * math.Log(v)
		}
		s += 2 * float64(c.p.count())
		if s < bestAIC {
			best, bestAIC = i, s
		}
	}
	if best < 0 {
		return cs[0]
	}
	return cs[best]
}

// fitPooled estimates one model for all regions of the run.
func (e *engine) fitPooled(ws []*regionWork) error {
	if len(ws) == 0 {
		return nil
	}
	gs := func() [][]float64 {
		out := make([][]float64, len(ws))
		for i, w := range ws {
			out[i] = w.g
		}
		return out
	}
	next := poolChoose(gs(), e.spec)
	shrunk := next.shrunk
	defer func() {
		for _, w := range ws {
			w.shrunk = w.shrunk || shrunk
		}
	}()
	if e.noise.Kind == NoiseARMA {
		return e.remlPooled(ws, next)
	}
	for pass := 2; ; pass++ {
		if err := e.glsShared(ws, next); err != nil {
			return err
		}
		for _, w := range ws {
			w.lagsum = lagSums(w.lagsum, w.resid, e.L)
			w.g = e.b.correctGLS(w.g, w.lagsum, w.ainv, w.s2)
			w.passes = pass
		}
		prev := next
		next = poolChoose(gs(), e.spec)
		shrunk = shrunk || next.shrunk
		if next.p.maxChange(prev.p, e.L) < e.tol || pass >= maxNoisePasses {
			return nil
		}
	}
}

// glsShared is gls with one model for every region: the model's Q'V^-1Q
// (or whitened design) is factorised once.
func (e *engine) glsShared(ws []*regionWork, m modelChoice) error {
	n, k := e.b.n, e.b.k
	if !e.b.fast {
		return e.slowShared(ws, m)
	}
	first := ws[0]
	pr, ok := newPrecision(m.p, n)
	fast := ok && e.assemble(first.a, pr) && cholesky(first.a, k)
	var wh whitener
	var qw []float64
	if !fast {
		var err error
		if wh, _, err = m.p.whitener(n); err != nil {
			return err
		}
		qw = make([]float64, n*k)
		whitenRows(wh, qw, e.b.q, n, k)
		blas64.Gemm(blas.Trans, blas.NoTrans, 1, blas64.General{Rows: n, Cols: k, Stride: k, Data: qw},
			blas64.General{Rows: n, Cols: k, Stride: k, Data: qw}, 0, blas64.General{Rows: k, Cols: k, Stride: k, Data: first.a})
		if !cholesky(first.a, k) {
			return fmt.Errorf("whitened design is numerically rank-deficient")
		}
	}
	cholInverse(first.a, k, first.ainv, first.linv)
	shared := e.b.covFactor(first.linv, make([]float64, k*k))
	for _, w := range ws {
		w.model, w.slow, w.slowBeta, w.prec = m, false, nil, pr
		w.a, w.ainv, w.linv, w.shared = first.a, first.ainv, first.linv, shared
		if fast {
			w.prec.apply(w.w, w.r0)
		} else {
			wh.Apply(w.w, w.r0)
		}
	}
	if fast {
		e.qtBatch(ws, func(w *regionWork) []float64 { return w.w }, func(w *regionWork) []float64 { return w.delta })
	} else {
		for _, w := range ws {
			for j := range w.delta {
				w.delta[j] = 0
			}
			for t := 0; t < n; t++ {
				yt := w.w[t]
				for j, q := range qw[t*k : (t+1)*k] {
					w.delta[j] += yt * q
				}
			}
		}
	}
	for _, w := range ws {
		cholSolve(w.a, k, w.delta)
	}
	e.glsResiduals(ws)
	for _, w := range ws {
		if fast {
			w.s2 = w.prec.quadraticScratch(w.resid, w.w) / float64(e.df)
		} else {
			wh.Apply(w.w, w.resid)
			w.s2 = vdot(w.w, w.w) / float64(e.df)
		}
	}
	return nil
}

// slowShared is per-run QR of the design whitened by the shared model.
func (e *engine) slowShared(ws []*regionWork, m modelChoice) error {
	n, k := e.b.n, e.b.k
	wh, _, err := m.p.whitener(n)
	if err != nil {
		return err
	}
	xw := whitenDesign(e.d, wh)
	lsq, err := NewLSQ(xw)
	if err != nil {
		return err
	}
	cov := lsq.CovUnscaled()
	fac, ok := upperFactor(cov)
	if !ok {
		return fmt.Errorf("whitened design is numerically rank-deficient")
	}
	ainv := make([]float64, k*k)
	e.toQBasis(cov, ainv)
	yw := make([]float64, n)
	for _, w := range ws {
		w.model, w.slow, w.shared = m, true, nil
		wh.Apply(yw, w.y)
		beta, _ := lsq.Solve(yw)
		copy(w.resid, residuals(e.d.X, w.y, beta))
		w.slowBeta, w.slowCov, w.slowFac = beta, cov, fac
		w.ainv = ainv
		wh.Apply(yw, w.resid)
		w.s2 = vdot(yw, yw) / float64(e.df)
	}
	return nil
}
