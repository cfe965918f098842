package fit

import (
	"fmt"
	"math"
	"sort"
	"sync"

	"github.com/viterin/vek"
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/mat"
)

// Estimation and whitening are iterated: the model estimated from the
// residuals of one fit whitens the next, until the modelled autocorrelation
// at lags 1..L moves by less than a tenth of its own sampling error,
// noiseTol/sqrt(n) with noiseTol = 0.1 (1/sqrt(n) is the standard error of a
// sample autocorrelation), between two passes; the model form may change
// between the two if the covariance does not. At most maxNoisePasses
// estimates are made. The first pass uses the OLS residuals with the
// truncated correction (olsCorrection), every later one the exact
// correction for GLS residuals (correctGLS).
const (
	noiseTol       = 0.1
	maxNoisePasses = 8
)

// estimationLags is L, the lags of the corrected autocovariances that the
// noise models are fitted to: the AR order (at least 8, so that the first
// pass's correction truncates V only where AR(1) coefficients below 0.6
// have decayed below 1%), or 16 where ARMA(1,1) is fitted, whose
// autocovariances decay more slowly. Never more than a quarter of the
// volumes.
func estimationLags(noise NoiseModel, n int) int {
	L := 8
	switch noise.Kind {
	case NoiseAR:
		L = max(L, noise.Order)
	case NoiseARMA, NoiseAuto:
		L = 16
	}
	L = min(L, n/4)
	if noise.Kind == NoiseAR {
		L = max(L, min(noise.Order, n-1))
	}
	return max(L, 1)
}

// batchRows is how many regions go into one matrix product Δ Q' in
// residBatch.
const batchRows = 128

// regionWork is one region's state during a run fit.
type regionWork struct {
	idx   int
	name  string
	y     []float64
	tss   float64   // sum of squares about the mean, kept volumes
	yy    float64   // sum of squares, kept volumes: tss + kept·mean²
	r0    []float64 // OLS residuals
	resid []float64 // residuals of the current fit
	w     []float64 // scratch: V^-1 r_0, whitened series
	gamma []float64 // coefficients of Q
	a0    []float64 // OLS coefficients of Q, Q'y
	delta []float64 // γ - a0
	a     []float64 // Q'V^-1Q and its Cholesky factor (lower)
	ainv  []float64 // (Q'V^-1Q)^-1
	s2    float64   // innovation variance
	model modelChoice
	next  modelChoice
	prec  precision
	slow  bool
	linv  []float64 // (L^-1)', A = L L' (upper triangular, see cholInverse)
	// shared is the covariance factor G (R^-1 A^-1 R^-T = G G', packed,
	// see RegionFit) when every region shares A (OLS, pooled).
	shared []float64
	// Per-region QR results, in the design's own basis.
	slowBeta []float64
	slowCov  *mat.SymDense // (X̃'X̃)^-1
	slowFac  []float64     // its packed upper-triangular factor
	passes   int
	done     bool
	// shrunk is set once any pass had to hold the model inside the
	// stationary (and invertible) region.
	shrunk bool
	lagsum []float64
	g      []float64
}

type engine struct {
	d     *Design
	b     *runBasis
	noise NoiseModel
	spec  estimSpec
	corr  *olsCorrection
	L     int
	df    int
	tol   float64 // convergence bound on the autocorrelations, noiseTol/sqrt(n)
	tmp   []float64
	// bufIn, bufOut hold one batch of the matrix products with Q.
	bufIn, bufOut []float64
	packed        []float64 // scratch of assemble, k(k+1)/2
	// work backs the work space of the block being fitted, vectors and
	// matrices in one buffer (one buffer per block, so that any buffer in
	// workPool serves any block of the same size); it comes from workPool
	// and goes back to it when the block is done.
	work []float64
}

// workPool keeps the work space of fitted blocks for the next block or run:
// a block of regions needs megabytes, and memory fresh from the operating
// system costs a page fault per 4 KB on first touch, which measured more
// than the arithmetic of a GLS pass (BenchmarkFitRunAuto). Buffers are
// handed out without clearing; every field of the work space is written
// before it is read.
var workPool sync.Pool

// getBuffer returns a buffer of length m from workPool, or a new one.
func getBuffer(m int) []float64 {
	if p, ok := workPool.Get().(*[]float64); ok {
		if cap(*p) >= m {
			return (*p)[:m]
		}
		// Too small for this block: let it go and make one that fits.
	}
	return make([]float64, m)
}

// putBuffer returns a buffer to workPool.
func putBuffer(b []float64) {
	if cap(b) > 0 {
		workPool.Put(&b)
	}
}

// qtBatch sets dst(w) = Q' src(w) for every region: k dot products of
// length n along the rows of Q', with vek's AVX2 kernel (see vdot), which
// measured faster than gonum's matrix product over a batch of regions
// (whose inner kernel is the SSE2 dot product) and needs no copy of the
// regions into a batch.
func (e *engine) qtBatch(ws []*regionWork, src func(*regionWork) []float64, dst func(*regionWork) []float64) {
	n, k := e.b.n, e.b.k
	for _, w := range ws {
		s, d := src(w), dst(w)
		for j := 0; j < k; j++ {
			d[j] = vdot(e.b.qt[j*n:(j+1)*n], s)
		}
	}
}

// residBatch sets w.resid = base(w) - Q coef(w) for every region: y - Q a
// for OLS, r_0 - Q δ for GLS. The product is C Q' for the coefficients C of
// up to batchRows regions (one row each) by vek's AVX2 matrix product,
// which runs along the rows of Q' (length n); gonum's, whose kernel is a
// dot product along the rows of C (length k), measured 2.5 times slower.
func (e *engine) residBatch(ws []*regionWork, base, coef func(*regionWork) []float64) {
	n, k := e.b.n, e.b.k
	for lo := 0; lo < len(ws); lo += batchRows {
		hi := min(lo+batchRows, len(ws))
		m := hi - lo
		g := e.batchOut(m * k)
		out := e.batchBuf(m * n)
		for i, w := range ws[lo:hi] {
			copy(g[i*k:(i+1)*k], coef(w))
		}
		vek.MatMul_Into(out, g, e.b.qt, k)
		for i, w := range ws[lo:hi] {
			vek.Sub_Into(w.resid, base(w), out[i*n:(i+1)*n])
		}
	}
}

// glsResiduals finishes the GLS of regions whose δ = (Q'V^-1Q)^-1 Q'V^-1 r_0
// is in w.delta: γ = a + δ, residuals r_0 - Q δ. Working from the OLS fit
// keeps the baseline, which a and y share, out of every product with V^-1.
func (e *engine) glsResiduals(ws []*regionWork) {
	for _, w := range ws {
		for j := range w.gamma {
			w.gamma[j] = w.a0[j] + w.delta[j]
		}
	}
	e.residBatch(ws, func(w *regionWork) []float64 { return w.r0 }, func(w *regionWork) []float64 { return w.delta })
}

// fitRunNoise is FitRun for the noise models.
func fitRunNoise(d *Design, names []string, y [][]float64, noise NoiseModel) (*RunFit, error) {
	n, k := d.X.Dims()
	if len(names) != len(y) {
		panic("fit: region names and signals differ in length")
	}
	b, err := newRunBasis(d.X)
	if err != nil {
		return nil, err
	}
	noise = noise.Resolve()
	if noise.Kind == NoiseAuto && noise.MaxOrder == 0 {
		noise.MaxOrder = MaxAROrder
	}
	e := &engine{d: d, b: b, noise: noise, df: n - k, tol: noiseTol / math.Sqrt(float64(n))}
	e.spec = estimSpec{kind: noise.Kind, order: noise.Order, pmax: noise.MaxOrder, df: n - k}
	rf := &RunFit{Design: d, Noise: noise, Volumes: n, Condition: b.cond, Regions: make([]RegionFit, len(y))}
	var ws []*regionWork
	for r, yr := range y {
		out := &rf.Regions[r]
		out.Region = names[r]
		// Censored volumes are fitted exactly by their indicator terms, so
		// only the kept volumes say whether the signal varies.
		if big := keptMaxAbs(yr, d.Censored); big > maxSignalMagnitude || (big > 0 && big < 1/maxSignalMagnitude) {
			out.Baseline = math.NaN()
			out.Skip = fmt.Sprintf("values of size %.3g, outside 1e-100 to 1e100, where the fit's squares overflow or vanish: rescale the signal", big)
			continue
		}
		mean, tss, kept := keptMeanSS(yr, d.Censored)
		out.Baseline = mean
		// Constant: no variation at all, or less than 1e-12 of the level
		// (the rounding of a constant's decimal text), whatever the scale.
		if tss == 0 || tss <= 1e-24*mean*mean*float64(kept) {
			out.Skip = "constant signal"
			continue
		}
		ws = append(ws, &regionWork{idx: r, name: names[r], y: yr, tss: tss, yy: tss + float64(kept)*mean*mean})
	}
	if noise.Kind != NoiseOLS {
		e.L = estimationLags(noise, n)
		if e.corr, err = b.olsCorrection(e.L); err != nil {
			return nil, tooFewForNoise(d, noise, e.L)
		}
		e.L = e.corr.lags
	}
	// Regions are independent unless pooled, so they are fitted in blocks:
	// the work space (three series per region) then stays a few hundred MB
	// at most, however many regions a run has (100,000 vertices would need
	// ~3 GB at once).
	block := len(ws)
	if !noise.Pool {
		block = regionBlock
	}
	for lo := 0; lo < len(ws); lo += block {
		part := ws[lo:min(lo+block, len(ws))]
		if err := e.fitBlock(part, rf); err != nil {
			return nil, err
		}
		for i := range part {
			part[i] = nil // release the block's work space
		}
	}
	return rf, nil
}

// tooFewForNoise is the error for a design whose residual degrees of
// freedom cannot determine the autocovariances at lags 0..L that the noise
// model is fitted to: the first-pass bias correction (olsCorrection) is
// then singular, which happens when n - k is about L or less, or when
// censoring leaves no pairs of kept volumes at some lag.
func tooFewForNoise(d *Design, noise NoiseModel, L int) error {
	n, k := d.X.Dims()
	return fmt.Errorf("%d volumes and %d model terms (%d of them for censored volumes) leave %d residual degrees of freedom, too few to estimate the %s noise model from the residual autocovariances at lags 0 to %d; use --noise none, fewer terms, less censoring or a longer run",
		n, k, d.CensoredCount(), n-k, noise.Name, L)
}

// CheckNoise reports whether the design leaves enough residual degrees of
// freedom to estimate the noise model (see tooFewForNoise), so that a run
// that FitRun would refuse is refused when the study is planned. It is nil
// for --noise none.
func CheckNoise(d *Design, noise NoiseModel) error {
	noise = noise.Resolve()
	if noise.Kind == NoiseOLS {
		return nil
	}
	b, err := newRunBasis(d.X)
	if err != nil {
		return err
	}
	n, _ := d.X.Dims()
	L := estimationLags(noise, n)
	if _, err := b.olsCorrection(L); err != nil {
		return tooFewForNoise(d, noise, L)
	}
	return nil
}

// maxSignalMagnitude bounds the size of a region's values (and
// 1/maxSignalMagnitude that of a region that is not zero): sums of squares
// and fourth powers of residuals must stay within double precision's range
// (1e±308). No unit of a BOLD signal comes near it; common practice, not a
// published limit.
const maxSignalMagnitude = 1e100

// keptMaxAbs is the largest |y_t| over the volumes that are not censored.
func keptMaxAbs(y []float64, censored []bool) float64 {
	m := 0.0
	for t, v := range y {
		if a := math.Abs(v); a > m && (censored == nil || !censored[t]) {
			m = a // (a comparison: math.Max, which orders NaN and -0, cost a fifth of an OLS fit)
		}
	}
	return m
}

// regionBlock is how many regions are fitted together when regions are
// independent: large enough for the batched products to run at full speed.
const regionBlock = 2048

// fitBlock fits a set of regions and writes their results into rf.
func (e *engine) fitBlock(ws []*regionWork, rf *RunFit) error {
	k := e.b.k
	e.start(ws)
	ws = e.dropExactFits(ws, rf)
	defer func() {
		// The results were copied out; the work space goes back.
		putBuffer(e.work)
		e.work = nil
	}()
	if e.noise.Kind == NoiseOLS {
		ident := make([]float64, k*k)
		for i := 0; i < k; i++ {
			ident[i*k+i] = 1
		}
		shared := e.b.rinvFactor()
		for _, w := range ws {
			w.ainv = ident
			w.shared = shared
			w.s2 = vdot(w.resid, w.resid) / float64(e.df)
			w.model = modelChoice{}
			e.finish(w, &rf.Regions[w.idx])
		}
		return nil
	}
	for _, w := range ws {
		w.lagsum = lagSums(w.lagsum, w.r0, e.L)
		w.g = e.corr.correct(w.g, w.lagsum)
		w.passes = 1
	}
	var err error
	if e.noise.Pool {
		err = e.fitPooled(ws)
	} else {
		err = e.fitRegions(ws)
	}
	if err != nil {
		return err
	}
	for _, w := range ws {
		e.finish(w, &rf.Regions[w.idx])
	}
	return nil
}

// start allocates the regions' work space and fits them by OLS: a = Q'y
// and the residuals r_0 = y - Q a, from which every model starts.
func (e *engine) start(ws []*regionWork) {
	n, k := e.b.n, e.b.k
	// One backing array for the block, so that the regions' work space
	// is one allocation (or none, from workPool), not a few per region.
	nv, nm := len(ws)*(3*n+3*k), 0
	if e.noise.Kind != NoiseOLS {
		nm = len(ws) * 3 * k * k
	}
	e.work = getBuffer(nv + nm)
	vecs, mats := e.work[:nv], e.work[nv:]
	next := func(m int) []float64 {
		v := vecs[:m:m]
		vecs = vecs[m:]
		return v
	}
	for i, w := range ws {
		w.r0, w.resid, w.w = next(n), next(n), next(n)
		w.gamma, w.a0, w.delta = next(k), next(k), next(k)
		if nm > 0 {
			m := mats[i*3*k*k : (i+1)*3*k*k]
			w.a, w.ainv, w.linv = m[:k*k:k*k], m[k*k:2*k*k:2*k*k], m[2*k*k:]
		}
	}
	e.qtBatch(ws, func(w *regionWork) []float64 { return w.y }, func(w *regionWork) []float64 { return w.a0 })
	e.residBatch(ws, func(w *regionWork) []float64 { return w.y }, func(w *regionWork) []float64 { return w.a0 })
	for _, w := range ws {
		copy(w.r0, w.resid)
		copy(w.gamma, w.a0)
	}
}

// exactFitTol is the relative size ||r_0|| / ||y|| below which the OLS
// residual r_0 of a region is taken to be zero to working precision: n·u
// (u = 2^-53 the unit roundoff), the usual tolerance for a computed zero in
// a length-n Householder computation (Higham 2002, Accuracy and Stability
// of Numerical Algorithms, §19.3 and §20.2: the computed residual is exact
// for data perturbed by O(n·u) in relative terms). Such a residual is the
// rounding of the fit, not noise, and no noise model, standard error or t
// value can be estimated from it.
func exactFitTol(n int) float64 { return float64(n) * 0x1p-53 }

// dropExactFits marks the regions that the design fits exactly (the OLS
// residual is zero to working precision, see exactFitTol) as skipped and
// returns the others (||y|| over the kept volumes: a censored volume is
// fitted exactly by its indicator whatever its value), so that they neither report a t value made of
// rounding errors nor enter a pooled noise model.
func (e *engine) dropExactFits(ws []*regionWork, rf *RunFit) []*regionWork {
	tol := exactFitTol(e.b.n)
	kept := ws[:0]
	for _, w := range ws {
		if vdot(w.r0, w.r0) <= tol*tol*w.yy {
			rf.Regions[w.idx].Skip = "fitted exactly by the design: no residual variation"
			continue
		}
		kept = append(kept, w)
	}
	return kept
}

// fitRegions estimates a model per region.
func (e *engine) fitRegions(ws []*regionWork) error {
	for _, w := range ws {
		w.next = chooseModel(w.g, e.spec)
		w.shrunk = w.next.shrunk
	}
	if e.noise.Kind == NoiseARMA {
		return e.remlRegions(ws)
	}
	for pass := 2; ; pass++ {
		var active []*regionWork
		for _, w := range ws {
			if !w.done {
				active = append(active, w)
			}
		}
		if len(active) == 0 {
			return nil
		}
		if err := e.gls(active, func(w *regionWork) modelChoice { return w.next }); err != nil {
			return err
		}
		for _, w := range active {
			w.lagsum = lagSums(w.lagsum, w.resid, e.L)
			w.g = e.b.correctGLS(w.g, w.lagsum, w.ainv, w.s2)
			w.next = chooseModel(w.g, e.spec)
			w.shrunk = w.shrunk || w.next.shrunk
			w.passes = pass
			if w.next.p.maxChange(w.model.p, e.L) < e.tol || pass >= maxNoisePasses {
				w.done = true
			}
		}
	}
}

// gls fits every region by GLS under the model m(w), which becomes
// w.model, by the cheapest exact route the design and model allow:
//
//  1. the many-regions path: Q'V^-1Q from the lagged cross-products of Q
//     (precision: per region O(D k² + k³ + n D)), and Q'V^-1 y, Q γ as
//     matrix products over all regions;
//  2. where the precision structure does not hold within maxPrecisionLags
//     (an ARMA(1,1) with |θ| near 1): Q whitened by the exact transform
//     and Q̃'Q̃, Q̃'ỹ per region, O(n k²);
//  3. for a design at or above fastPathCondition: QR of the whitened
//     design per region.
func (e *engine) gls(ws []*regionWork, m func(*regionWork) modelChoice) error {
	k := e.b.k
	var fast []*regionWork
	prs := make([]precision, len(ws))
	oks := make([]bool, len(ws))
	for i, w := range ws {
		w.model = m(w)
		w.slow, w.slowBeta = false, nil
		if e.b.fast {
			prs[i], oks[i] = newPrecision(w.model.p, e.b.n)
		}
	}
	lagCap := e.lagCap(prs, oks)
	for i, w := range ws {
		if !e.b.fast {
			w.slow = true
			if err := e.slowGLS(w); err != nil {
				return fmt.Errorf("region %q: %v", w.name, err)
			}
			continue
		}
		pr := prs[i]
		if oks[i] && pr.lags() <= lagCap && e.assemble(w.a, pr) && cholesky(w.a, k) {
			w.prec = pr
			w.prec.apply(w.w, w.r0)
			fast = append(fast, w)
		} else if err := e.whitenedQGLS(w); err != nil {
			return fmt.Errorf("region %q: %v", w.name, err)
		}
		cholInverse(w.a, k, w.ainv, w.linv)
	}
	e.qtBatch(fast, func(w *regionWork) []float64 { return w.w }, func(w *regionWork) []float64 { return w.delta })
	b := make([]float64, k)
	for _, w := range fast {
		// With w = V^-1 r_0, b = Q'w and δ = A^-1 b (A = Q'V^-1Q), the
		// GLS residual r = r_0 - Qδ has
		//   r'V^-1 r = r_0'w - 2 δ'b + δ'Aδ = r_0'w - δ'b,
		// which needs no second product with V^-1. δ'b = b'A^-1 b is
		// the part of r_0'w that the design takes, at most all of it, so
		// the difference keeps its precision unless the design fits r_0
		// almost exactly under V (such regions were dropped, dropExactFits).
		copy(b, w.delta)
		cholSolve(w.a, k, w.delta)
		w.s2 = (vdot(w.r0, w.w) - vdot(w.delta, b)) / float64(e.df)
	}
	e.glsResiduals(fast)
	return nil
}

// lagCap is the number of lagged cross-products of Q the many-regions path
// may use in this pass: a region whose precision needs more is fitted by
// whitening Q (route 2). Each further lag costs about n k² once per run, a
// region on route 2 about 1.5 n k² per pass, so the cap is the cheapest
// trade between them (lags already computed are free).
func (e *engine) lagCap(prs []precision, oks []bool) int {
	have := len(e.b.lag) - 1
	var need []int
	for i, ok := range oks {
		if ok && prs[i].lags() > have {
			need = append(need, prs[i].lags())
		}
	}
	if len(need) == 0 {
		return have
	}
	sort.Ints(need)
	best, bestCost := have, 1.5*float64(len(need))
	for i, d := range need {
		if cost := float64(d-have) + 1.5*float64(len(need)-1-i); cost < bestCost {
			best, bestCost = d, cost
		}
	}
	return best
}

// whitenedQGLS is route 2 of gls: Q̃ = T Q, A = Q̃'Q̃ (Cholesky in w.a),
// γ = A^-1 Q̃'T y, residuals y - Qγ.
func (e *engine) whitenedQGLS(w *regionWork) error {
	n, k := e.b.n, e.b.k
	wh, _, err := w.model.p.whitener(n)
	if err != nil {
		return err
	}
	qw := e.scratch(n * k)
	whitenRows(wh, qw, e.b.q, n, k)
	blas64.Gemm(blas.Trans, blas.NoTrans, 1, blas64.General{Rows: n, Cols: k, Stride: k, Data: qw},
		blas64.General{Rows: n, Cols: k, Stride: k, Data: qw}, 0, blas64.General{Rows: k, Cols: k, Stride: k, Data: w.a})
	if !cholesky(w.a, k) {
		return fmt.Errorf("whitened design is numerically rank-deficient")
	}
	wh.Apply(w.w, w.r0)
	for j := range w.delta {
		w.delta[j] = 0
	}
	for t := 0; t < n; t++ {
		yt := w.w[t]
		for j, q := range qw[t*k : (t+1)*k] {
			w.delta[j] += yt * q
		}
	}
	cholSolve(w.a, k, w.delta)
	copy(w.resid, w.r0)
	for t := 0; t < n; t++ {
		w.resid[t] -= vdot(e.b.qrow(t), w.delta)
	}
	for j := range w.gamma {
		w.gamma[j] = w.a0[j] + w.delta[j]
	}
	wh.Apply(w.w, w.resid)
	w.s2 = vdot(w.w, w.w) / float64(e.df)
	return nil
}

// whitenRows whitens every column of the n×k row-major matrix src into dst
// (the transforms act along the rows, so a column is whitened by applying
// them to a strided copy).
func whitenRows(wh whitener, dst, src []float64, n, k int) {
	col := make([]float64, n)
	out := make([]float64, n)
	for j := 0; j < k; j++ {
		for t := 0; t < n; t++ {
			col[t] = src[t*k+j]
		}
		wh.Apply(out, col)
		for t := 0; t < n; t++ {
			dst[t*k+j] = out[t]
		}
	}
}

func (e *engine) batchBuf(m int) []float64 {
	if len(e.bufIn) < m {
		e.bufIn = make([]float64, m)
	}
	return e.bufIn[:m]
}

func (e *engine) batchOut(m int) []float64 {
	if len(e.bufOut) < m {
		e.bufOut = make([]float64, m)
	}
	return e.bufOut[:m]
}

func (e *engine) scratch(m int) []float64 {
	if len(e.tmp) < m {
		e.tmp = make([]float64, m)
	}
	return e.tmp[:m]
}

// assemble writes the lower triangle of Q'V^-1Q = v_0 I + sum_d v_d lag_d +
// corner terms into a; false when the run is too short for the lags.
func (e *engine) assemble(a []float64, pr precision) bool {
	b := e.b
	k := b.k
	D := pr.lags()
	if D >= b.n {
		return false
	}
	b.ensureLags(D)
	clear(a[:k*k])
	if D > 0 {
		// The packed lower triangle of sum_d v_d lag_d in one product.
		kp := packedSize(k)
		if len(e.packed) < kp {
			e.packed = make([]float64, kp)
		}
		sum := e.packed[:kp]
		blas64.Gemv(blas.Trans, 1, blas64.General{Rows: D, Cols: kp, Stride: kp, Data: b.lagPacked[:D*kp]},
			blas64.Vector{N: D, Inc: 1, Data: pr.v[1 : D+1]}, 0, blas64.Vector{N: kp, Inc: 1, Data: sum})
		for i := 0; i < k; i++ {
			copy(a[i*k:i*k+i+1], sum[i*(i+1)/2:])
		}
	}
	for i := 0; i < k; i++ {
		a[i*k+i] += pr.v[0]
	}
	bot := e.scratch(2 * k)
	top := bot[k:]
	bot = bot[:k]
	for m, u := range pr.u {
		for j := range bot {
			bot[j], top[j] = 0, 0
		}
		for i, ui := range u {
			for j, q := range b.qrow(b.n - 1 - i) {
				bot[j] += ui * q
			}
			for j, q := range b.qrow(i) {
				top[j] += ui * q
			}
		}
		s := pr.s[m]
		for i := 0; i < k; i++ {
			row := a[i*k : i*k+i+1]
			bb, tt := bot[:len(row)], top[:len(row)]
			bi, ti := s*bot[i], s*top[i]
			for j := range row {
				row[j] += bi*bb[j] + ti*tt[j]
			}
		}
	}
	return true
}

// slowGLS fits one region by QR of its whitened design.
func (e *engine) slowGLS(w *regionWork) error {
	n := e.b.n
	wh, _, err := w.model.p.whitener(n)
	if err != nil {
		return err
	}
	lsq, err := NewLSQ(whitenDesign(e.d, wh))
	if err != nil {
		return fmt.Errorf("whitened design: %v", err)
	}
	yw := make([]float64, n)
	wh.Apply(yw, w.y)
	beta, _ := lsq.Solve(yw)
	copy(w.resid, residuals(e.d.X, w.y, beta))
	w.slowBeta = beta
	w.slowCov = lsq.CovUnscaled()
	var ok bool
	if w.slowFac, ok = upperFactor(w.slowCov); !ok {
		return fmt.Errorf("whitened design is numerically rank-deficient")
	}
	e.toQBasis(w.slowCov, w.ainv)
	wh.Apply(yw, w.resid)
	w.s2 = vdot(yw, yw) / float64(e.df)
	return nil
}

// whitenDesign returns the design with every column whitened.
func whitenDesign(d *Design, wh whitener) *mat.Dense {
	n, k := d.X.Dims()
	xw := mat.NewDense(n, k, nil)
	col := make([]float64, n)
	wcol := make([]float64, n)
	for j := 0; j < k; j++ {
		mat.Col(col, j, d.X)
		wh.Apply(wcol, col)
		xw.SetCol(j, wcol)
	}
	return xw
}

// toQBasis writes R C R' into dst: (X'V^-1X)^-1 in the basis of Q, which
// the bias correction of GLS residuals needs.
func (e *engine) toQBasis(c *mat.SymDense, dst []float64) {
	k := e.b.k
	rr := e.b.r
	tmp := make([]float64, k*k)
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			s := 0.0
			for p := i; p < k; p++ {
				s += rr[i*k+p] * c.At(p, j)
			}
			tmp[i*k+j] = s
		}
	}
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			s := 0.0
			for p := j; p < k; p++ {
				s += tmp[i*k+p] * rr[j*k+p]
			}
			dst[i*k+j] = s
		}
	}
}

// finish computes the region's results from its final fit.
func (e *engine) finish(w *regionWork, out *RegionFit) {
	n := e.b.n
	p := w.model.p
	out.covScale = w.s2
	switch {
	case w.slowBeta != nil:
		out.Beta = w.slowBeta
		out.covFactor = w.slowFac
	case w.shared != nil:
		out.Beta = e.b.beta(w.gamma)
		out.covFactor = w.shared
	default:
		out.Beta = e.b.beta(w.gamma)
		out.covFactor = e.b.covFactor(w.linv, e.scratch(e.b.k*e.b.k))
	}
	out.setStdErrors()
	out.DF = e.df
	wr := w.resid
	g0 := 1.0
	if p.count() > 0 {
		wh, gg, err := p.whitener(n)
		if err != nil {
			panic(err) // the model was checked when it was fitted
		}
		g0 = gg
		wr = make([]float64, n)
		wh.Apply(wr, w.resid)
	}
	out.Sigma = math.Sqrt(w.s2 * g0)
	out.RSquared = 1 - vdot(w.resid, w.resid)/w.tss
	out.AR = append([]float64(nil), p.ar...)
	out.MA = append([]float64(nil), p.ma...)
	out.WhiteShare = math.NaN()
	if p.isARMA() {
		if s, ok := ARMAWhiteShare(p.ar[0], p.ma[0]); ok {
			out.WhiteShare = s
		}
	}
	out.ARShrunk = w.shrunk || w.model.shrunk
	out.NoisePasses = w.passes
	out.NoiseName = e.noise.Name
	if e.noise.Kind == NoiseAuto {
		out.NoiseName = "auto:" + p.name()
	}
	out.NoiseScope = "region"
	if e.noise.Pool {
		out.NoiseScope = "run"
	}
	out.DurbinWatson = DurbinWatson(wr)
	K := LjungBoxLag(n)
	out.RawACF = autocorrelationInto(make([]float64, K), w.resid, e.scratch(n))
	out.WhitenedACF = autocorrelationInto(make([]float64, K), wr, e.scratch(n))
	_, out.LjungBoxP = ljungBoxACF(out.WhitenedACF, n, p.count())
	_, out.NormalityP = JarqueBera(wr)
}

// Autocorrelation returns ρ̂_1..ρ̂_K of r about its mean,
// ρ̂_k = sum_{t≥k} (r_t - r̄)(r_{t-k} - r̄) / sum_t (r_t - r̄)², the
// autocorrelations the Ljung-Box statistic sums.
func Autocorrelation(r []float64, K int) []float64 {
	return autocorrelationInto(make([]float64, K), r, make([]float64, len(r)))
}

// autocorrelationInto writes ρ̂_1..ρ̂_len(out) of r into out, using c
// (len(r)) as scratch.
func autocorrelationInto(out, r, c []float64) []float64 {
	n := len(r)
	mean := 0.0
	for _, v := range r {
		mean += v
	}
	mean /= float64(n)
	for t, v := range r {
		c[t] = v - mean
	}
	c0 := vdot(c, c)
	for k := 1; k <= len(out) && k < n; k++ {
		out[k-1] = vdot(c[k:n], c[:n-k]) / c0
	}
	return out
}
