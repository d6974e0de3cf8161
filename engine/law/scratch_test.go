package law

import (
	"fmt"
	"math"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"
)

func TestScratch(t *testing.T) {
	for _, d := range []int{1, 2, 3, 5} {
		for _, T := range []float64{1, 10} {
			R := 1.3 * math.Sqrt(T*float64(d))
			exact := (distuv.ChiSquared{K: float64(d)}).CDF(R * R / T)
			p := radialProblem(d, 2, T, R, nodesTo(R, T), true)
			var lv []float64
			for l := 0; l < 5; l++ {
				v, _ := p.values(l)
				lv = append(lv, v[0])
			}
			fmt.Printf("d=%d T=%g exact=%.12f\n", d, T, exact)
			for l := range lv {
				s := fmt.Sprintf("  l=%d P=%.3e", l, lv[l]-exact)
				if l >= 1 {
					s += fmt.Sprintf(" X=%.3e", lv[l]+(lv[l]-lv[l-1])/3-exact)
				}
				if l >= 2 {
					s += fmt.Sprintf(" ratio=%.2f", (lv[l-1]-lv[l-2])/(lv[l]-lv[l-1]))
				}
				fmt.Println(s)
			}
		}
	}
}

func TestScratchReact(t *testing.T) {
	for _, d := range []int{1, 3} {
		T := 100.0
		R := guess(d, T, 0.5, false)
		p := radialProblem(d, 2, T, R, nodesTo(R, T), false)
		var lv []float64
		for l := 0; l < 4; l++ {
			st := time.Now()
			v, s := p.values(l)
			lv = append(lv, v[0])
			fmt.Printf("d=%d l=%d P=%.12f min=%.2e max-1=%.2e ns/nodestep=%.1f %v\n", d, l, v[0], s.minU, s.maxU-1, float64(time.Since(st).Nanoseconds())/s.nodeSteps, p.level(l).String())
			if l >= 1 {
				fmt.Printf("   X=%.12f\n", lv[l]+(lv[l]-lv[l-1])/3)
			}
			if l >= 2 {
				fmt.Printf("   ratio=%.2f\n", (lv[l-1]-lv[l-2])/(lv[l]-lv[l-1]))
			}
		}
	}
}
