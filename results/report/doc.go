// Package report turns a bbmx store into the answers of a sweep: fits with their
// uncertainties, compared with the theory of branching Brownian motion where there is
// one, written to a folder as a page (report.md and report.html), figures (PNG and SVG)
// and tables (CSV and JSON).
//
// What is fitted:
//
//   - Per cell (one model and horizon T): moments and quantiles of R*_T - m_T, a
//     maximum-likelihood Gumbel fit (scale against 1/theta), the upper-tail slope of
//     log P(R*_T - m_T > x) (against -theta), and a Kolmogorov-Smirnov test against the
//     exact law of R*_T from engine/law at the same (d, T).
//   - Across the horizons of one model: median and mean of R*_T against
//     a T + b log T + c (+ e/sqrt T with five horizons or more), a against the speed v
//     and b against (d-4)/(2 theta).
//   - Random shift, per checkpoint s: R*_T - m_T - log(Z_s)/theta on the replicates with
//     Z_s > 0 as a Gumbel (scale against 1/theta), and the share with Z_s <= 0.
//   - Directions: uniformity of the farthest particle's direction (exact by rotation
//     invariance); for d = 2 the probability-integral transform of its angle under the
//     measure proportional to Z_s(u)^+ du, interpolated from the stored grid.
//   - Extremal process: gaps between consecutive top radii, the mean number of particles
//     within x of the maximum, and the mean extremal intensity against the many-to-one
//     first moment e^{gT} P(|sigma B_T| - m_T in a bin) (exact at every T).
//
// Stores written without per-replicate records still give the moments, quantiles,
// Gumbel and tail fits and the grouped Kolmogorov-Smirnov test from the sketch's fine
// histogram of R*_T - m_T, the share of Z_s <= 0 and the intensity; the report lists the
// fits it had to skip.
//
// Intervals are at Options.Level (95% by default); a verdict "agrees" means the theory
// value lies in the interval, or, for a test, that its p-value is at least 1 - Level.
// So under the theory each verdict is wrong 5% of the time: the numbers are statistical
// estimates, and the page says so.
package report
