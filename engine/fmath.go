package engine

import "math"

// The elementary functions a record depends on, written out so that records do not
// depend on the processor. The math package's Exp and Log are assembly on amd64 and
// arm64 (Exp on amd64 takes an FMA path on processors that have one), and its Go code
// may itself be compiled with fused multiply-adds, so their last bit can differ between
// machines; a ziggurat tail draw goes through Log, a checkpoint's sums through Exp, and
// every histogram through the centring's Log. These are the math package's portable
// algorithms (from FreeBSD's msun: exp, log, and the sin/cos kernels with Cody–Waite
// reduction) with every product that is added to something rounded by an explicit
// conversion, which the Go specification says prevents fusion; they use only IEEE
// arithmetic, math.Frexp, math.Ldexp and math.Sqrt, which are exact. Each is within
// about one unit in the last place of the true value, and within two of the math package
// (TestPortableMath), which on amd64 is itself off near overflow (Exp(709.7) = +Inf) and
// for subnormal arguments of Log.

// pexp is e^x.
func pexp(x float64) float64 {
	const (
		ln2Hi     = 6.93147180369123816490e-01
		ln2Lo     = 1.90821492927058770002e-10
		log2e     = 1.44269504088896338700e+00
		overflow  = 7.09782712893383973096e+02
		underflow = -7.45133219101941108420e+02
		nearZero  = 1.0 / (1 << 28)

		p1 = 1.66666666666666657415e-01
		p2 = -2.77777777770155933842e-03
		p3 = 6.61375632143793436117e-05
		p4 = -1.65339022054652515390e-06
		p5 = 4.13813679705723846039e-08
	)
	switch {
	case math.IsNaN(x):
		return x
	case x > overflow:
		return math.Inf(1)
	case x < underflow:
		return 0
	case -nearZero < x && x < nearZero:
		return 1 + x
	}
	// x = k ln 2 + r, r = hi - lo carried in two parts for precision
	var k int
	switch {
	case x < 0:
		k = int(float64(log2e*x) - 0.5)
	case x > 0:
		k = int(float64(log2e*x) + 0.5)
	}
	hi := x - float64(float64(k)*ln2Hi)
	lo := float64(float64(k) * ln2Lo)
	r := hi - lo
	t := float64(r * r)
	c := r - float64(t*(p1+float64(t*(p2+float64(t*(p3+float64(t*(p4+float64(t*p5)))))))))
	y := 1 - ((lo - float64(r*c)/(2-c)) - hi)
	if k < -1021 || k > 1022 {
		return math.Ldexp(y, k) // subnormal or near overflow
	}
	return y * math.Float64frombits(uint64(k+1023)<<52) // exact: a power of two in range
}

// plog is the natural logarithm.
func plog(x float64) float64 {
	const (
		ln2Hi = 6.93147180369123816490e-01
		ln2Lo = 1.90821492927058770002e-10
		l1    = 6.666666666666735130e-01
		l2    = 3.999999999940941908e-01
		l3    = 2.857142874366239149e-01
		l4    = 2.222219843214978396e-01
		l5    = 1.818357216161805012e-01
		l6    = 1.531383769920937332e-01
		l7    = 1.479819860511658591e-01
	)
	switch {
	case math.IsNaN(x) || math.IsInf(x, 1):
		return x
	case x < 0:
		return math.NaN()
	case x == 0:
		return math.Inf(-1)
	}
	// x = 2^k (1 + f), sqrt(2)/2 <= 1 + f < sqrt(2)
	f1, ki := math.Frexp(x)
	if f1 < math.Sqrt2/2 {
		f1 *= 2
		ki--
	}
	f := f1 - 1
	k := float64(ki)
	s := f / (2 + f)
	s2 := s * s
	s4 := s2 * s2
	t1 := float64(s2 * (l1 + float64(s4*(l3+float64(s4*(l5+float64(s4*l7)))))))
	t2 := float64(s4 * (l2 + float64(s4*(l4+float64(s4*l6)))))
	r := t1 + t2
	hfsq := float64(0.5 * f * f)
	return float64(k*ln2Hi) - ((hfsq - (float64(s*(hfsq+r)) + float64(k*ln2Lo))) - f)
}

// psincos is (sin x, cos x) for 0 <= x < 2^29 (the direction grids' angles are below
// 10^4).
func psincos(x float64) (float64, float64) {
	const (
		pi4a = 7.85398125648498535156e-1 // pi/4 in three parts
		pi4b = 3.77489470793079817668e-8
		pi4c = 2.69515142907905952645e-15
	)
	if !(x >= 0 && x < 1<<29) {
		panic("psincos: argument out of range")
	}
	j := uint64(x * (4 / math.Pi)) // the octant
	y := float64(j)
	if j&1 == 1 { // map zeros to the origin
		j++
		y++
	}
	j &= 7
	z := ((x - float64(y*pi4a)) - float64(y*pi4b)) - float64(y*pi4c)
	zz := z * z
	sin := z + float64(z*zz*poly5(zz, sinCoef))
	cos := 1.0 - float64(0.5*zz) + float64(zz*zz*poly5(zz, cosCoef))
	// the octant's reflections, as the math package's Sin and Cos make them
	sinSign, cosSign := false, false
	if j > 3 {
		j -= 4
		sinSign, cosSign = true, true
	}
	if j > 1 {
		cosSign = !cosSign
	}
	s, c := sin, cos
	if j == 1 || j == 2 {
		s, c = cos, sin
	}
	if sinSign {
		s = -s
	}
	if cosSign {
		c = -c
	}
	return s, c
}

var (
	sinCoef = [6]float64{
		1.58962301576546568060e-10, -2.50507477628578072866e-8, 2.75573136213857245213e-6,
		-1.98412698295895385996e-4, 8.33333333332211858878e-3, -1.66666666666666307295e-1,
	}
	cosCoef = [6]float64{
		-1.13585365213876817300e-11, 2.08757008419747316778e-9, -2.75573141792967388112e-7,
		2.48015872888517045348e-5, -1.38888888888730564116e-3, 4.16666666666665929218e-2,
	}
)

// poly5 is ((((c0 zz + c1) zz + c2) zz + c3) zz + c4) zz + c5, each product rounded.
func poly5(zz float64, c [6]float64) float64 {
	p := c[0]
	for _, ci := range c[1:] {
		p = float64(p*zz) + ci
	}
	return p
}

// oneMinusExpOver is (1 - e^{-y}) / y for y >= 0 (1 at y = 0): by its series where the
// subtraction would cancel, else directly.
func oneMinusExpOver(y float64) float64 {
	if y > 0.5 {
		return (1 - pexp(-y)) / y
	}
	// sum_k (-y)^k / (k+1)!; 16 terms leave less than 1e-17 at y = 0.5
	term, sum := 1.0, 1.0
	for k := 1.0; k <= 16; k++ {
		term = float64(term*-y) / (k + 1)
		sum += term
	}
	return sum
}

// lgammaHalf[d] is log Gamma(d/2) for d = 1 .. maxDim+2: for d/2 = n an integer,
// log (n-1)!; for d/2 = n + 1/2, log sqrt(pi) + sum_{k<n} log(k + 1/2). Sums of plog,
// so the same on every machine.
var lgammaHalf = func() [maxDim + 3]float64 {
	var t [maxDim + 3]float64
	for d := 1; d < len(t); d++ {
		var s float64
		if d%2 == 0 {
			for k := 1; k < d/2; k++ {
				s += plog(float64(k))
			}
		} else {
			s = 0.5 * plog(math.Pi)
			for k := 0; k < d/2; k++ {
				s += plog(float64(k) + 0.5)
			}
		}
		t[d] = s
	}
	return t
}()
