// Package engine simulates branching Brownian motion (BBM) in R^d exactly.
//
// The model: one particle starts at the origin; each particle moves as an independent
// Brownian motion with variance Sigma^2 per unit time in each coordinate, and after an
// Exp(Beta) lifetime is replaced by Children offspring at its position.
//
// Simulation is event-driven (no time step): over a lifetime tau the displacement is
// exactly N(0, Sigma^2 tau I_d). The genealogical tree is walked depth first, so memory
// is O(depth), never O(population). Randomness is a pure function of
// (seed, cell, replicate, node path), so a replicate is bit-identical on any machine,
// in any order, on any number of goroutines and after any split into subtrees.
//
// This file is the one place where the model's derived constants are defined.
package engine

import (
	"fmt"
	"math"
)

// Model holds the parameters of BBM in R^d.
type Model struct {
	Dim      int     // dimension d >= 1
	Sigma    float64 // diffusion coefficient: variance Sigma^2 per unit time per coordinate
	Beta     float64 // branching rate: lifetimes are Exp(Beta)
	Children int     // offspring per branching, k >= 2
}

// DefaultModel is the standard model in d = 2: sigma = beta = 1, binary branching.
func DefaultModel() Model { return Model{Dim: 2, Sigma: 1, Beta: 1, Children: 2} }

// maxDim is the largest dimension supported.
const maxDim = 64

// minScale and maxScale bound sigma and beta. Both are units (of space and of time), so
// nothing is lost by rescaling into this range, while values far outside it overflow
// radii, martingale weights or the law solver's grid (sigma = 1e100 or beta = 1e-300
// gave infinite radii, or a report that could not be drawn or solved).
const minScale, maxScale = 1e-6, 1e6

// Validate reports the first parameter that is out of range.
func (m Model) Validate() error {
	switch {
	case m.Dim < 1:
		return fmt.Errorf("dimension must be at least 1, got %d", m.Dim)
	case m.Dim > maxDim:
		return fmt.Errorf("dimension %d is larger than the supported %d", m.Dim, maxDim)
	case !(m.Sigma > 0) || math.IsInf(m.Sigma, 0):
		return fmt.Errorf("sigma must be a positive finite number, got %v", m.Sigma)
	case m.Sigma < minScale || m.Sigma > maxScale:
		return fmt.Errorf("sigma %v is outside the supported [%g, %g]: measure space in other units (the process with sigma s is the one with sigma 1, scaled by s)", m.Sigma, minScale, maxScale)
	case !(m.Beta > 0) || math.IsInf(m.Beta, 0):
		return fmt.Errorf("branching rate beta must be a positive finite number, got %v", m.Beta)
	case m.Beta < minScale || m.Beta > maxScale:
		return fmt.Errorf("branching rate beta %v is outside the supported [%g, %g]: measure time in other units (the process with rate b up to time T is the one with rate 1 up to b T, space scaled by 1/sqrt(b))", m.Beta, minScale, maxScale)
	case m.Children < 2:
		return fmt.Errorf("children per branching must be at least 2, got %d", m.Children)
	case m.Children > 64:
		return fmt.Errorf("children per branching %d is larger than the supported 64", m.Children)
	}
	return nil
}

// Growth is the population growth rate g = beta (k - 1); E[N_t] = e^{g t}.
func (m Model) Growth() float64 { return float64(m.Beta * float64(m.Children-1)) }

// Speed is the front speed v = sigma sqrt(2 g).
func (m Model) Speed() float64 { return m.Sigma * math.Sqrt(2*m.Growth()) }

// Theta is the critical slope theta = v / sigma^2.
func (m Model) Theta() float64 { return m.Speed() / (m.Sigma * m.Sigma) }

// LogCoefficient is the coefficient (d - 4) / (2 theta) of log t in the centring.
func (m Model) LogCoefficient() float64 { return float64(m.Dim-4) / (2 * m.Theta()) }

// Centring is m_t(d) = v t + (d - 4)/(2 theta) log t, the centring of the maximal
// radius (for d = 1 and the one-sided maximum the log coefficient is -3/(2 theta) too).
func (m Model) Centring(t float64) float64 {
	if t <= 0 {
		return 0
	}
	return float64(m.Speed()*t) + float64(m.LogCoefficient()*plog(t))
}

// MeanPopulation is E[N_t] = e^{g t}.
func (m Model) MeanPopulation(t float64) float64 { return pexp(m.Growth() * t) }

// ExpectedNodes is the cost model: the expected number of tree nodes (particles ever
// born, each costing d normals and one exponential) of one replicate to horizon t,
// (k e^{g t} - 1)/(k - 1), about (k/(k-1)) e^{g t}.
func (m Model) ExpectedNodes(t float64) float64 {
	k := float64(m.Children)
	return (float64(k*pexp(m.Growth()*t)) - 1) / (k - 1)
}
