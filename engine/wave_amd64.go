package engine

// haveKernel says whether this build has waveKernel in assembly.
const haveKernel = true

// waveConsts is what waveKernel needs besides its batch: the horizon, the rate as it is
// applied (1/beta to multiply by, or beta to divide by, as divide says), sigma, the
// last checkpoint time and the dimension (1 to 3).
type waveConsts struct {
	horizon, rate, sigma, lastCheck float64
	d, divide                       int
}

// waveKernel walks one step of the m = 2*len(broods) children of a batch of binary
// broods, as wave3's loop does: child j is child j%2 of batch[j/2]. Each child that
// its fast paths can take is written to out (a brood to walk further) or to leaves;
// the others (a rejection step, a checkpoint cut, no time left to move) are listed in
// slow by their number j, for the caller to walk. It returns the bytes written to
// out, leaves and slow.
//
//go:noescape
func waveKernel(batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int)
