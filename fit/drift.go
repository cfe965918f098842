package fit

import "math"

// CosineDrift returns the discrete cosine drift terms for a run of n volumes
// at repetition time tr seconds, for periods longer than highpass seconds:
//
//	d_k(t) = sqrt(2/n) cos(π k (2t + 1) / (2n)),  t = 0..n-1,  k = 1..K,
//
// the orthonormal DCT-II basis without its constant term (the intercept
// carries that). Term k has period 2 n tr / k, so K = floor(2 n tr / highpass)
// (capped at n-1). highpass <= 0 gives no terms. The 128 s default of
// --highpass is common practice for event-related and block designs.
func CosineDrift(n int, tr, highpass float64) [][]float64 {
	if highpass <= 0 || n < 2 {
		return nil
	}
	kf := math.Floor(2 * float64(n) * tr / highpass)
	K := n - 1
	if kf < float64(K) { // (compared as floats: a huge kf would not convert to an int)
		K = int(kf)
	}
	cols := make([][]float64, K)
	s := math.Sqrt(2 / float64(n))
	for k := 1; k <= K; k++ {
		c := make([]float64, n)
		for t := range c {
			c[t] = s * math.Cos(math.Pi*float64(k)*float64(2*t+1)/float64(2*n))
		}
		cols[k-1] = c
	}
	return cols
}

// LegendreDrift returns Legendre polynomial drift terms P_1..P_K evaluated at
// x_t = 2t/(n-1) - 1, t = 0..n-1 (so the run spans [-1, 1]), from the
// recurrence (k+1) P_{k+1}(x) = (2k+1) x P_k(x) - k P_{k-1}(x), P_0 = 1
// (Abramowitz and Stegun 1964, 22.7.10). P_0 is the intercept's.
func LegendreDrift(n, order int) [][]float64 {
	if order < 1 || n < 2 {
		return nil
	}
	cols := make([][]float64, order)
	for k := range cols {
		cols[k] = make([]float64, n)
	}
	for t := 0; t < n; t++ {
		x := 2*float64(t)/float64(n-1) - 1
		p0, p1 := 1.0, x
		cols[0][t] = p1
		for k := 1; k < order; k++ {
			p2 := (float64(2*k+1)*x*p1 - float64(k)*p0) / float64(k+1)
			cols[k][t] = p2
			p0, p1 = p1, p2
		}
	}
	return cols
}
