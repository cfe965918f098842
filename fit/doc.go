// Package fit builds the design of each run, estimates the region GLMs and
// makes the inferences: response models, drift terms, least squares through
// an orthogonal factorisation, autoregressive noise models with exact
// generalised least squares, t contrasts, Benjamini-Hochberg q values and the
// fixed-effects combination of runs within a subject.
//
// fit knows no file format: it takes the typed values that package roi reads
// and returns plain results that package report writes. Every formula carries
// its reference in the doc comment of the function that computes it.
package fit
