// Package latentresp draws the continuous latent responses that lie behind
// categorical answers: fast two-sided truncated-normal draws and the interval
// bookkeeping that ties a category to its pair of thresholds (Albert & Chib
// 1993, JASA 88:669).
package latentresp
