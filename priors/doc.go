// Package priors holds lagstar's prior families: their default settings,
// log densities and the conjugate draws (gamma, inverse-Wishart) the Gibbs
// blocks need. All densities are on the latent scale.
package priors
