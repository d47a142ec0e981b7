// Package sampler fits lagstar's models by Gibbs sampling with data
// augmentation: latent responses behind categorical answers (Albert & Chib
// 1993), random intercepts, occasion means, carry-over and cross-lag paths,
// innovation covariances and the random-intercept covariance, each drawn by
// a Block from its full conditional (or by a Metropolis-Hastings step that
// leaves it invariant). Chains run in parallel with one seeded stream each.
package sampler
