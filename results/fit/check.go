package fit

import (
	"fmt"
	"math"
)

// checkSample reports an error if x has fewer than min points or holds a
// non-finite value. what names the argument in the message.
func checkSample(what string, x []float64, min int) error {
	if len(x) < min {
		return fmt.Errorf("fit: %s has %d points, need at least %d", what, len(x), min)
	}
	for i, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("fit: %s[%d] = %v is not finite", what, i, v)
		}
	}
	return nil
}

// checkLevel reports an error unless 0 < level < 1.
func checkLevel(level float64) error {
	if !(level > 0 && level < 1) {
		return fmt.Errorf("fit: confidence level %v is not in (0, 1)", level)
	}
	return nil
}

// sum returns the sum of x with Neumaier's compensated summation, so that
// results do not depend on cancellation in long samples.
func sum(x []float64) float64 {
	var s, c float64
	for _, v := range x {
		t := s + v
		if math.Abs(s) >= math.Abs(v) {
			c += (s - t) + v
		} else {
			c += (v - t) + s
		}
		s = t
	}
	return s + c
}

func mean(x []float64) float64 { return sum(x) / float64(len(x)) }
