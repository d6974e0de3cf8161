// Package law computes the exact law of the maximal radius of branching Brownian motion
// (BBM) in R^d by solving the equation that governs it, as a deterministic reference
// for the simulation.
//
// The representation ("Application of Brownian motion to the equation of
// Kolmogorov-Petrovskii-Piskunov", Comm. Pure Appl. Math. 28 (1975), in its
// d-dimensional radial form): with R*_t the largest distance from the origin at time t,
//
//	P(R*_t <= R) = w(t, 0),
//	w_t = (sigma^2/2) (w_rr + (d-1)/r w_r) + beta (w^k - w),  w(0, r) = 1{r <= R},
//
// and w_r(t, 0) = 0. For d = 1 the same equation on the line, started from 1{x >= 0},
// gives P(max X_t <= x) = w(t, x) for every x at once (the one-sided law).
//
// # Method
//
// The solver works in the scaled units x' = x sqrt(g)/sigma, t' = g t with
// g = beta (k-1), where the equation depends on d and k only, and it solves for the
// tail probability u = 1 - w. The state w = 1 is unstable for the reaction, so storing
// w would let round-off of size 1e-16 grow like e^{g t} ahead of the front; u keeps
// full relative precision where it is tiny.
//
//   - Space: a conservative finite-volume discretisation of the radial Laplacian on the
//     nodes r_i = i h with exact shell volumes (exact on quadratics, so second order,
//     including the origin cell), or the standard three-point Laplacian on the line.
//     The jump of the start data lies on a node, with value 1/2 there.
//   - Time: Strang splitting. The reaction u' = ((1-u) - (1-u)^k)/(k-1) is a Bernoulli
//     equation and is solved exactly (for k = 2 it is the logistic flow); the diffusion
//     step is Crank-Nicolson. Consecutive reaction half-steps are merged, which is exact
//     because the reaction is autonomous.
//   - Start: after the discontinuous start data the time mesh is graded,
//     t_n = t_g (n/M_g)^2 on [0, t_g], then uniform, and the first two steps are each
//     replaced by two backward Euler half-steps (Rannacher's damping), which restores
//     the second order that uniform steps lose on a jump.
//   - Domain: the outer boundary (w = 0) is placed where a many-to-one bound, with the
//     reflection principle and Chernoff's chi-square bound, shows that its effect on
//     the answer is below 1e-15 (see domainRadius); the bound is added to the error.
//   - Error: grids with h and every time step halved together (level l has h_0/2^l).
//     Successive levels give Richardson extrapolants X_l = P_l + (P_l - P_{l-1})/3 that
//     remove the h^2 + tau^2 term. The reported value is the finest X; its error is
//     estimated from the distance D to the previous extrapolant: D/5 (three times the
//     asymptotic D/15) when four levels confirm the O(h^4) rate, D itself otherwise;
//     plus the boundary bound and a round-off floor. Levels are added until the
//     estimate is below Options.Tolerance (with a cap on the work, and a clear error).
//   - Work: behind the front u rounds to 1; those nodes, beyond a margin, are left out
//     of the steps, and values below 1e-300 far ahead of the front are set to zero
//     (subnormal arithmetic is slow), each changing the answer at round-off level.
//
// Cost: the domain is [0, v t + O(1)] and the number of steps grows like t, so a solve
// at a fixed grid costs O(t^2); for a fixed error the grid must be refined slowly as t
// grows (the front-speed error, O(h^4) after extrapolation, accumulates over time). See
// the "Law solver" section of BENCHMARKS.md for the measured growth. Beyond g t of about
// 600 the double-precision range ends ahead of the front (values below 1e-300 are
// dropped), which the error estimate does not cover.
//
// The numbers are deterministic: the same call gives the same bits.
package law
