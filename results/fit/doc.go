// Package fit is the statistical fitting library of bbmx: maximum-likelihood
// Gumbel fits, upper-tail slopes, Kolmogorov–Smirnov tests, weighted linear
// least squares for centring fits, sample quantiles and moments with their
// standard errors, uniformity tests for directions on the sphere, and a
// deterministic bootstrap.
//
// Every function is pure: it takes float64 samples and returns an estimate
// together with its uncertainty (a standard error from the observed Fisher
// information or the regression covariance, or a bootstrap interval driven by
// a caller-given seed). Nothing here performs I/O or depends on other bbmx
// packages, so the store and the report can wire these fits in as they see
// fit, and so each fit can be checked on synthetic samples with known laws.
//
// Bad input (too few points, non-finite values, invalid parameters) is
// reported as an error naming the bad value, never as a NaN result.
package fit
