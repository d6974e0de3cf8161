//go:build !purego

package engine

// haveKernel says whether this build has waveKernel in assembly.
const haveKernel = true

// waveConsts is what waveKernel needs besides its batch: the horizon, the rate as it is
// applied (1/beta to multiply by, or beta to divide by, as the kernel chosen does),
// sigma and the last checkpoint time.
type waveConsts struct{ horizon, rate, sigma, lastCheck float64 }

// waveKernel1, 2 and 3 (and their Div versions) walk one step of the m children of a
// batch of m/2 binary broods in 1, 2 and 3 dimensions, as fastStep does: child j is
// child j%2 of batch[j/2]. Each child that the fast paths take is written to out (a
// brood to walk further) or to leaves; the others (a rejection step, a checkpoint cut,
// no time left to move) are listed in slow by their number j, in increasing order, for
// the caller to walk. They return the bytes written to out, leaves and slow. The
// coordinates past the dimension are neither read nor written: they are 0 in every
// brood and leaf that wave3 writes.
//
//go:noescape
func waveKernel1(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel1Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

// waveKernel is the waveKernel function for d dimensions that divides by the rate
// (c.rate is beta) or multiplies by it (c.rate is 1/beta).
func waveKernel(d int, divide bool, batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int) {
	switch {
	case d == 1 && !divide:
		return waveKernel1(batch, m, out, leaves, slow, c)
	case d == 1:
		return waveKernel1Div(batch, m, out, leaves, slow, c)
	case d == 2 && !divide:
		return waveKernel2(batch, m, out, leaves, slow, c)
	case d == 2:
		return waveKernel2Div(batch, m, out, leaves, slow, c)
	case !divide:
		return waveKernel3(batch, m, out, leaves, slow, c)
	}
	return waveKernel3Div(batch, m, out, leaves, slow, c)
}
