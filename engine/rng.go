package engine

import (
	"math"
	"math/bits"
)

// key identifies one node of one replicate's genealogical tree: a 128-bit hash of
// (sweep seed, cell, replicate, path of child indices from the root). Every random
// number a node uses comes from a generator seeded with its key alone, which is what
// makes a replicate independent of order, thread count and splitting.
type key struct{ hi, lo uint64 }

// mix64 is the SplitMix64 finaliser: a bijection on 64 bits with full avalanche.
func mix64(x uint64) uint64 {
	x ^= x >> 30
	x *= 0xbf58476d1ce4e5b9
	x ^= x >> 27
	x *= 0x94d049bb133111eb
	x ^= x >> 31
	return x
}

// rootKey is the key of the root particle of replicate rep of a cell.
func rootKey(seed, cell, rep uint64) key {
	a := mix64(seed ^ 0x6a09e667f3bcc908)
	b := mix64(cell ^ 0xbb67ae8584caa73b ^ a)
	c := mix64(rep + 0x3c6ef372fe94f82b ^ b)
	return key{hi: mix64(a ^ c*0x9e3779b97f4a7c15), lo: mix64(b + c)}
}

// StreamVersion numbers the derivation of random numbers from (seed, cell, replicate,
// node path): rootKey, child and nodeRand. The same (seed, cell, replicate) gives the
// same record only under the same stream version, so stores record it, and growing,
// resuming, auditing or merging a store needs the store's version. 1: the first
// derivation (four chained finalisers per child key); 2: the child key's halves as two
// side-by-side finalisers (a shorter critical path, 15–25 % faster walks).
const StreamVersion = 2

// child is the key of the i-th child of the node with key k. Each half is one SplitMix64
// finaliser of both parent halves and the child index, and the two are computed side by
// side: the key is on the walk's critical path (key, then lifetime, then the
// leaf-or-branch test), so its latency, not its throughput, sets the walk's pace. For a
// fixed parent, distinct children get distinct halves (mix64 is a bijection).
func (k key) child(i int) key {
	x := uint64(i+1) * 0x9e3779b97f4a7c15
	return key{
		hi: mix64(k.hi ^ bits.RotateLeft64(k.lo, 32) ^ x),
		lo: mix64((k.lo + x) ^ bits.RotateLeft64(k.hi, 23) ^ 0xd1b54a32d192ed03),
	}
}

// nodeRand is a generator that is re-seeded in place for every node. It is PCG-DXSM with
// a 128-bit state (the generator of math/rand/v2's PCG, same constants, same output
// function) and the ziggurat method for the exponential and normal laws (Marsaglia and
// Tsang, "The Ziggurat Method for Generating Random Variables", Journal of Statistical
// Software 5 (2000)) with math/rand/v2's tables, written out here so the calls inline and
// go through no interface. Its draws equal those of rand.New(rand.NewPCG(hi, lo)) bit for
// bit (TestGeneratorMatchesStdlib), so the engine's output is what it was with the
// standard library's generator.
type nodeRand struct{ hi, lo uint64 }

func (n *nodeRand) seed(k key) { n.hi, n.lo = k.hi, k.lo }

// Uint64 advances the 128-bit LCG state and applies the DXSM output function.
func (n *nodeRand) Uint64() uint64 {
	const (
		mulHi = 2549297995355413924
		mulLo = 4865540595714422341
		incHi = 6364136223846793005
		incLo = 1442695040888963407
	)
	hi, lo := bits.Mul64(n.lo, mulLo)
	hi += n.hi*mulLo + n.lo*mulHi
	lo, c := bits.Add64(lo, incLo, 0)
	hi, _ = bits.Add64(hi, incHi, c)
	n.lo, n.hi = lo, hi
	const cheapMul = 0xda942042e4dd58b5
	hi ^= hi >> 32
	hi *= cheapMul
	hi ^= hi >> 48
	hi *= lo | 1
	return hi
}

// Float64 is uniform on [0, 1) with 53 random bits.
func (n *nodeRand) Float64() float64 { return float64(n.Uint64()<<11>>11) / (1 << 53) }

// ExpFloat64 is a standard exponential variate. The fast path (one table test) is kept
// small so that it inlines; the rare rejection steps are in expSlow.
func (n *nodeRand) ExpFloat64() float64 {
	u := n.Uint64()
	j := uint32(u)
	i := uint8(u >> 32)
	if j < zigKe[i] {
		return float64(j) * float64(zigWe[i])
	}
	return n.expSlow(u)
}

func (n *nodeRand) expSlow(u uint64) float64 {
	const re = 7.69711747013104972
	for {
		j := uint32(u)
		i := uint8(u >> 32)
		x := float64(j) * float64(zigWe[i])
		if j < zigKe[i] {
			return x
		}
		if i == 0 {
			return re - math.Log(n.Float64())
		}
		if zigFe[i]+float32(n.Float64())*(zigFe[i-1]-zigFe[i]) < float32(math.Exp(-x)) {
			return x
		}
		u = n.Uint64()
	}
}

// NormFloat64 is a standard normal variate; fast path inlined, rare steps in normSlow.
func (n *nodeRand) NormFloat64() float64 {
	u := n.Uint64()
	j := int32(u)
	i := u >> 32 & 0x7F
	if absInt32(j) < zigKn[i] {
		return float64(j) * float64(zigWn[i])
	}
	return n.normSlow(u)
}

func absInt32(i int32) uint32 {
	if i < 0 {
		return uint32(-i)
	}
	return uint32(i)
}

func (n *nodeRand) normSlow(u uint64) float64 {
	const rn = 3.442619855899
	for {
		j := int32(u)
		i := u >> 32 & 0x7F
		x := float64(j) * float64(zigWn[i])
		if absInt32(j) < zigKn[i] {
			return x
		}
		if i == 0 {
			for {
				x = -math.Log(n.Float64()) * (1.0 / rn)
				y := -math.Log(n.Float64())
				if y+y >= x*x {
					break
				}
			}
			if j > 0 {
				return rn + x
			}
			return -rn - x
		}
		if zigFn[i]+float32(n.Float64())*(zigFn[i-1]-zigFn[i]) < float32(math.Exp(-.5*x*x)) {
			return x
		}
		u = n.Uint64()
	}
}
