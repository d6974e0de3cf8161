package engine

import "math/bits"

// key identifies one node of one replicate's genealogical tree: a 128-bit hash of
// (sweep seed, cell, replicate, path of child indices from the root). Every random
// number a node uses comes from its key alone (see normalWord), which is what makes a
// replicate independent of order, thread count and splitting.
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
// node path): rootKey, child and the node's draws (below). The same (seed, cell,
// replicate) gives the same record only under the same stream version, so stores record
// it, and growing, resuming, auditing or merging a store needs the store's version.
// 1: the first derivation (four chained finalisers per child key, every draw from a
// PCG-DXSM generator seeded with the node's key); 2: the child key's halves as two
// side-by-side finalisers; 3: the child key's halves as SplitMix64 outputs, and a node's
// draws taken from its key (below), with PCG-DXSM only for the ziggurat's rare rejection
// steps (14–17 % faster walks).
const StreamVersion = 3

// Constants of the key derivation and of a node's draws: odd increments for SplitMix64
// sequences (Steele, Lea and Flood, "Fast Splittable Pseudorandom Number Generators",
// OOPSLA 2014), one per use, so that no two uses walk the same sequence.
const (
	childGammaHi = 0x9e3779b97f4a7c15
	childGammaLo = 0xd1b54a32d192ed03
	normalGamma  = 0xda3e39cb94b95bdb
)

// child is the key of the i-th child of the node with key k. Each half is the (i+1)-th
// output of a SplitMix64 sequence started from a mix of both parent halves, and the two
// are computed side by side: the key is on the walk's critical path (key, then lifetime,
// then the leaf-or-branch test), so its latency, not its throughput, sets the walk's
// pace. Siblings' keys are thus consecutive outputs of one SplitMix64 sequence per half,
// the use that generator was designed and tested for. For a fixed parent, distinct
// children get distinct halves (mix64 is a bijection).
func (k key) child(i int) key {
	a, b := k.mixes()
	return childOf(a, b, i)
}

// mixes are the two parent words all of k's children's keys are made from.
func (k key) mixes() (uint64, uint64) {
	return k.hi ^ bits.RotateLeft64(k.lo, 32), k.lo ^ bits.RotateLeft64(k.hi, 23)
}

// childOf is the key of child i of the node whose mixes are (a, b).
func childOf(a, b uint64, i int) key {
	n := uint64(i + 1)
	return key{hi: mix64(a + n*childGammaHi), lo: mix64(b + n*childGammaLo)}
}

// A node's draws under stream 3. The key's halves are already SplitMix64 outputs, so
// they are used as random words directly, which takes a generator's state update and
// output function off the walk's critical path:
//   - the lifetime's standard exponential comes from the high half (the ziggurat's
//     fast path reads 40 of its bits);
//   - the n-th standard normal (n = 0, 1, ...) from the word normalWord(k, n): the low
//     half for n = 0; for n = 1 the bits the first two words leave unread (24 of the
//     high half, 25 of the low half; the ziggurat reads 39); from n = 2 on the
//     SplitMix64 sequence mix64(lo + n*normalGamma). So a node in d <= 2 needs no
//     hashing beyond its key;
//   - the ziggurat's rare rejection steps (about 1 % of draws) take further uniforms
//     from a nodeRand seeded with the key, in the order they occur.

// normalWord is the random word of the n-th normal of the node with key k.
func normalWord(k key, n uint64) uint64 {
	switch n {
	case 0:
		return k.lo
	case 1:
		return spareWord(k)
	}
	return mix64(k.lo + n*normalGamma)
}

// spareWord is normalWord(k, 1): the high half's 24 bits above the exponential's 40,
// then the low half's 25 bits above normal 0's 39.
func spareWord(k key) uint64 { return k.hi>>40 | k.lo>>39<<24 }

// normal2Gamma is 2*normalGamma mod 2^64: normalWord(k, 2) = mix64(k.lo + normal2Gamma).
const normal2Gamma = 0xb47c73972972b7b6

// zigNormal is the ziggurat's fast path on word u: the normal and whether it stands;
// if not, the draw is normSlow(u) instead.
func zigNormal(u uint64) (float64, bool) { return zigNormalFrom(&zigN, u) }

// zigNormalFrom is zigNormal from the strips t: zigN, or a copy scaled by scaledStrips.
func zigNormalFrom(t *[128]zigStrip, u uint64) (float64, bool) {
	j, s := int32(u), &t[u>>32&0x7F]
	return float64(j) * s.w, s.holds(int64(j))
}

// zigExp is the ziggurat's fast path for the exponential on word u: the value and
// whether it stands; if not, the draw is expSlow(u) instead.
func zigExp(u uint64) (float64, bool) { return zigExpFrom(&zigE, u) }

// zigExpFrom is zigExp from the strips t: zigE, or a copy scaled by scaledStrips.
func zigExpFrom(t *[256]zigStrip, u uint64) (float64, bool) {
	j, s := uint32(u), &t[uint8(u>>32)]
	return float64(j) * s.w, s.holds(int64(j))
}

// zigStrip is one strip of a ziggurat's fast path as zigNormal and zigExp read it: the
// strip's width as a float64 (the float32 table's value, exactly), and its bound k as a
// range [-off, n-off) for one comparison. A normal's draw stands when |j| < k, that is
// when j + k - 1, taken unsigned, is below 2k - 1 (off = k - 1, n = 2k - 1; a strip
// with k = 0 has off = n = 0, so no draw stands); an exponential's when j < k (off = 0,
// n = k).
type zigStrip struct {
	w      float64
	off, n uint32
}

// holds is whether the fast path's draw with integer part j stands.
func (s *zigStrip) holds(j int64) bool { return uint64(j+int64(s.off)) < uint64(s.n) }

// zigN and zigE are the normal's and the exponential's strips, from the tables of
// ziggurat_tables.go.
var zigN, zigE = normalStrips(), expStrips()

func normalStrips() (t [128]zigStrip) {
	for i := range t {
		t[i] = zigStrip{w: float64(zigWn[i])}
		if k := zigKn[i]; k > 0 { // k < 2^31, so 2k - 1 fits
			t[i].off, t[i].n = k-1, 2*k-1
		}
	}
	return t
}

func expStrips() (t [256]zigStrip) {
	for i := range t {
		t[i] = zigStrip{w: float64(zigWe[i]), n: zigKe[i]}
	}
	return t
}

// expFromWord is the standard exponential whose ziggurat fast path reads u; the rare
// rejection steps draw further uniforms from r.
func expFromWord(u uint64, r *nodeRand) float64 {
	if e, ok := zigExp(u); ok {
		return e
	}
	return r.expSlow(u)
}

// normFromWord is the standard normal whose ziggurat fast path reads u; the rare
// rejection steps draw further uniforms from r.
func normFromWord(u uint64, r *nodeRand) float64 {
	if z, ok := zigNormal(u); ok {
		return z
	}
	return r.normSlow(u)
}

// nodeRand is a generator re-seeded in place with every node's key, for the ziggurat's
// rejection steps (see above); it is also the generator of streams 1 and 2. It is PCG-DXSM with
// a 128-bit state (the generator of math/rand/v2's PCG, same constants, same output
// function) and the ziggurat method for the exponential and normal laws (Marsaglia and
// Tsang, "The Ziggurat Method for Generating Random Variables", Journal of Statistical
// Software 5 (2000)) with math/rand/v2's tables, written out here so the calls inline and
// go through no interface. Its draws equal those of rand.New(rand.NewPCG(hi, lo)) bit for
// bit (TestGeneratorMatchesStdlib), so the ziggurat code is the standard library's.
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

// ExpFloat64 is a standard exponential variate from the next word (expFromWord).
func (n *nodeRand) ExpFloat64() float64 { return expFromWord(n.Uint64(), n) }

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
			return re - plog(n.Float64())
		}
		if expWedges[i].below(x, zigFe[i]+float32(float32(n.Float64())*(zigFe[i-1]-zigFe[i]))) {
			return x
		}
		u = n.Uint64()
	}
}

// NormFloat64 is a standard normal variate from the next word (normFromWord).
func (n *nodeRand) NormFloat64() float64 { return normFromWord(n.Uint64(), n) }

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
				x = float64(-plog(n.Float64()) * (1.0 / rn))
				y := -plog(n.Float64())
				if y+y >= x*x {
					break
				}
			}
			if j > 0 {
				return rn + x
			}
			return -rn - x
		}
		if normWedges[i].below(float64(.5*x)*x, zigFn[i]+float32(float32(n.Float64())*(zigFn[i-1]-zigFn[i]))) {
			return x
		}
		u = n.Uint64()
	}
}
