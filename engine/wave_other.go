//go:build !amd64 || purego

package engine

// haveKernel says whether this build has waveKernel in assembly: not on this
// architecture, or with the purego build tag; wave3 then takes every batch with
// fastStep.
const haveKernel = false

type waveConsts struct {
	horizon, beta, sigma, lastCheck float64
	exp, norm                       *zigStrip
}

func waveKernel(d int, divide, scale bool, batch *brood, m int, out *brood, leaves *vec, slow *uint32, c *waveConsts) (outBytes, leafBytes, slowBytes int) {
	panic("engine: waveKernel has no assembly on this architecture")
}
