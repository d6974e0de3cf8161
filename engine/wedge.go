package engine

import "math"

// The ziggurat's wedge test accepts a candidate x of strip i when a uniform height a
// (a float32) lies under the density: a < float32(e^-q), with q = x for the exponential
// and q = x²/2 for the normal. Computing e^-q is most of the cost of a rejection step
// (pexp is a polynomial and a division, tens of nanoseconds, on the walk's critical
// path). A squeeze decides most wedge tests without it: e^-q is convex in q, so on the
// strip's range [qLo, qHi] it lies above its tangents at either end and below the chord
// between them. When a is below the higher tangent, or above the chord, by a relative
// margin that dwarfs float32's rounding (2^-24) and the bounds' own float64 rounding
// (a few 2^-53), the exact comparison would give the same answer; only the rest compute
// pexp. So the draws are bit for bit those of the plain test (TestWedgeSqueeze compares
// the two; the pinned digests would change otherwise).

// wedge is one strip's squeeze: the range of q its rejected candidates can have, e^-q at
// both ends, and the chord's slope.
type wedge struct{ qLo, qHi, eLo, eHi, slope float64 }

// squeezeMargin is the relative margin of the squeeze's decisions (2^-20).
const squeezeMargin = 1.0 / (1 << 20)

// below reports whether a < float32(pexp(-q)), q in the strip's range.
func (w *wedge) below(q float64, a float32) bool {
	if b, sure := w.squeeze(q, float64(a)); sure {
		return b
	}
	return a < float32(pexp(-q))
}

// squeeze decides h < e^-q from the bounds alone when it can (sure), for the strip's
// heights h (floats below 1, far from float32's underflow).
func (w *wedge) squeeze(q, h float64) (below, sure bool) {
	tangent := max(float64(w.eHi*(1+(w.qHi-q))), float64(w.eLo*(1-(q-w.qLo))))
	if h < float64(tangent*(1-squeezeMargin)) {
		return true, true
	}
	if q >= w.qLo && q <= w.qHi && h > float64((w.eLo+float64((q-w.qLo)*w.slope))*(1+squeezeMargin)) {
		return false, true
	}
	return false, false
}

// newWedge is the squeeze for q in [qLo, qHi]. An empty range (no strip of the tables
// has one) gives a squeeze of NaNs, every comparison with which is false: it is never
// sure, and the exact test decides.
func newWedge(qLo, qHi float64) wedge {
	if !(qHi > qLo) {
		nan := math.NaN()
		return wedge{nan, nan, nan, nan, nan}
	}
	w := wedge{qLo: qLo, qHi: qHi, eLo: pexp(-qLo), eHi: pexp(-qHi)}
	w.slope = (w.eHi - w.eLo) / (qHi - qLo)
	return w
}

// expWedges and normWedges are the strips' squeezes. A strip's rejected candidates
// are x = j * w[i] for j from the fast path's bound k[i] to the word's top (2^32 for the
// exponential, |j| up to 2^31 for the normal); rounding is monotone, so the x (and q) of
// the bound and of the top enclose every candidate's.
var expWedges, normWedges = func() (e [256]wedge, n [128]wedge) {
	for i := range e {
		w := float64(zigWe[i])
		e[i] = newWedge(float64(float64(zigKe[i])*w), float64((1<<32)*w))
	}
	for i := range n {
		w := float64(zigWn[i])
		lo, hi := float64(float64(zigKn[i])*w), float64((1<<31)*w)
		n[i] = newWedge(float64(.5*lo)*lo, float64(.5*hi)*hi)
	}
	return
}()
