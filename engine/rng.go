package engine

import "math/rand/v2"

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

// child is the key of the i-th child of the node with key k.
func (k key) child(i int) key {
	x := uint64(i+1) * 0x9e3779b97f4a7c15
	a := mix64(k.hi ^ mix64(k.lo+x))
	b := mix64(k.lo ^ mix64(a+x^0xd1b54a32d192ed03))
	return key{hi: a, lo: b}
}

// nodeRand is a generator that is re-seeded in place for every node: reseeding a PCG
// costs a few nanoseconds and allocates nothing, where a new generator per node would
// allocate and cost several times more.
type nodeRand struct {
	pcg *rand.PCG
	r   *rand.Rand
}

func newNodeRand() nodeRand {
	p := rand.NewPCG(0, 0)
	return nodeRand{pcg: p, r: rand.New(p)}
}

func (n nodeRand) seed(k key) { n.pcg.Seed(k.hi, k.lo) }
