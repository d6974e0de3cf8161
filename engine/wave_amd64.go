//go:build !purego

package engine

// haveKernel says whether this build has waveKernel in assembly.
const haveKernel = true

// waveConsts is what waveKernel needs besides its batch: the horizon, beta (which the
// Div kernels divide by), sigma (which the Sig kernels multiply by), the last checkpoint
// time, and the exponential's and the normal's strips (walker.expTab, normTab).
type waveConsts struct {
	horizon, beta, sigma, lastCheck float64
	exp, norm                       *zigStrip
}

// waveKernel1, 2 and 3 (and their Div, Sig and DivSig versions) walk one step of the m
// children of a batch of m/2 binary broods in 1, 2 and 3 dimensions, as fastStep does:
// child j is child j%2 of batch[j/2]. Each child that the fast paths take is written to
// out (a brood to walk further) or to leaves; the others (a rejection step, a
// checkpoint cut, no time left to move) are listed in slow by their number j, in
// increasing order, for the caller to walk. They return the bytes written to out,
// leaves and slow. The coordinates past the dimension are neither read nor written:
// they are 0 in every brood and leaf that wave3 writes.
//
//go:noescape
func waveKernel1(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel1Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel1Sig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel1DivSig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2Sig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel2DivSig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3Div(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3Sig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

//go:noescape
func waveKernel3DivSig(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)

// waveKernel is the waveKernel function for d dimensions that divides each lifetime by
// c.beta (divide) or takes 1/beta from c.exp, and multiplies each increment's standard
// deviation by c.sigma (scale) or takes sigma from c.norm. (A table of the functions
// would be called indirectly, and then c and the slow list would escape to the heap.)
func waveKernel(d int, divide, scale bool, batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int) {
	v := 4*(d-1) + 2*b2i(divide) + b2i(scale)
	switch v {
	case 0:
		return waveKernel1(batch, m, out, leaves, slow, c)
	case 1:
		return waveKernel1Sig(batch, m, out, leaves, slow, c)
	case 2:
		return waveKernel1Div(batch, m, out, leaves, slow, c)
	case 3:
		return waveKernel1DivSig(batch, m, out, leaves, slow, c)
	case 4:
		return waveKernel2(batch, m, out, leaves, slow, c)
	case 5:
		return waveKernel2Sig(batch, m, out, leaves, slow, c)
	case 6:
		return waveKernel2Div(batch, m, out, leaves, slow, c)
	case 7:
		return waveKernel2DivSig(batch, m, out, leaves, slow, c)
	case 8:
		return waveKernel3(batch, m, out, leaves, slow, c)
	case 9:
		return waveKernel3Sig(batch, m, out, leaves, slow, c)
	case 10:
		return waveKernel3Div(batch, m, out, leaves, slow, c)
	}
	return waveKernel3DivSig(batch, m, out, leaves, slow, c)
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}
