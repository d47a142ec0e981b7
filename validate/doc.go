// Package validate holds lagstar's evidence that the sampler draws from the
// posterior it claims: simulation-based calibration (Talts et al. 2018) for
// every model option, Geweke's (2004) joint-distribution test, exact checks
// against quadrature and closed forms, and fits of outside reference data.
// The long tier runs with LAGSTAR_VALIDATE=1 (see docs/validation.md); a
// compact subset runs in the default `go test ./...`.
package validate
