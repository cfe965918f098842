package fit

import "math"

// Response model names accepted by --hrf.
const (
	HRFDoubleGamma = "double-gamma"
)

// Shape parameters of the double-gamma response (Friston et al. 1998,
// NeuroImage 7:30-40; Glover 1999, NeuroImage 9:416-429).
const (
	dgPeakShape       = 6.0
	dgUndershootShape = 16.0
	dgUndershootRatio = 1.0 / 6.0
	// responseLength is how long after an event the response is followed,
	// in seconds; the double-gamma is below 1e-6 of its peak beyond it.
	responseLength = 32.0
)

// GammaPDF returns the gamma density with the given shape and unit scale:
//
//	f(t) = t^(a-1) e^(-t) / Γ(a),  t > 0,
//
// and 0 for t <= 0.
func GammaPDF(t, shape float64) float64 {
	if t <= 0 {
		return 0
	}
	lg, _ := math.Lgamma(shape)
	return math.Exp((shape-1)*math.Log(t) - t - lg)
}

// DoubleGamma returns the response at t seconds after a brief event:
//
//	h(t) = t^(a1-1) e^(-t) / Γ(a1) - c · t^(a2-1) e^(-t) / Γ(a2)
//
// with a1 = 6, a2 = 16, c = 1/6 (Friston et al. 1998; Glover 1999). It peaks
// near 5 s and undershoots near 15 s; its scale is arbitrary because
// condition regressors are rescaled to peak at 1 (see ConditionRegressor).
func DoubleGamma(t float64) float64 {
	return GammaPDF(t, dgPeakShape) - dgUndershootRatio*GammaPDF(t, dgUndershootShape)
}

// More response models accepted by --hrf.
const (
	HRFGamma = "gamma" // a single gamma density, shape 6, unit scale: no undershoot
	HRFFIR   = "fir"   // finite impulse response bins (see FIRRegressors)
)

// gammaPDFDerivative returns d/dt of GammaPDF(t, a):
//
//	f'(t) = f(t) ((a - 1)/t - 1).
func gammaPDFDerivative(t, a float64) float64 {
	if t <= 0 {
		return 0
	}
	return GammaPDF(t, a) * ((a-1)/t - 1)
}

// DoubleGammaTimeDerivative returns h'(t), the derivative of DoubleGamma
// with respect to time. A response that comes δ seconds earlier than the
// model, h(t + δ) ≈ h(t) + δ h'(t), loads positively on this term.
func DoubleGammaTimeDerivative(t float64) float64 {
	return gammaPDFDerivative(t, dgPeakShape) - dgUndershootRatio*gammaPDFDerivative(t, dgUndershootShape)
}

// DoubleGammaScaled is the double-gamma with both gamma densities at scale s
// (width s times the standard one): h_s(t) = h(t/s)/s.
func DoubleGammaScaled(t, s float64) float64 {
	return DoubleGamma(t/s) / s
}

// DoubleGammaDispersionDerivative returns ∂h_s(t)/∂s at s = 1,
//
//	-(h(t) + t h'(t)),
//
// the change of the response as it widens: a response wider than the model
// loads positively on this term.
func DoubleGammaDispersionDerivative(t float64) float64 {
	return -(DoubleGamma(t) + t*DoubleGammaTimeDerivative(t))
}

// responseFunc returns the response model's function of time.
func responseFunc(hrf string) func(float64) float64 {
	switch hrf {
	case HRFGamma:
		return func(t float64) float64 { return GammaPDF(t, dgPeakShape) }
	default:
		return DoubleGamma
	}
}
