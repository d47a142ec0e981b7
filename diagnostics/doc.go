// Package diagnostics computes convergence and summary statistics of MCMC
// draws: rank-normalized split R-hat, bulk- and tail-ESS, Monte Carlo
// standard errors of the mean and of quantiles, and posterior summaries,
// following Vehtari, Gelman, Simpson, Carpenter & Buerkner (2021, Bayesian
// Analysis 16:667). Chains are given as one slice of draws per chain; all
// chains must have the same length.
package diagnostics
