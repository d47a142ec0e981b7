package validate

import "fmt"

// base builds a model file for calibration scenarios.
func base(outcomes, between, within, means string) string {
	return fmt.Sprintf(`data: {csv: sim.csv, person: person, occasion: occasion}
outcomes: %s
person_differences: {%s}
dynamics: {%s}
means: {%s}
`, outcomes, between, within, means)
}

const (
	pairOB = `[{name: mood, type: ordinal, categories: 4, lowest: 1}, {name: ache, type: binary}]`
	ri     = "random_intercepts: true"
	noRI   = "random_intercepts: false"
	growth = "random_intercepts: true, random_slopes: true"
	cross  = "lags: cross, residual_correlation: true, over_time: equal, first_occasion: free"
	eqM    = "over_time: equal"
)

// Scenarios lists one calibration scenario per model option of the model
// file (docs/validation.md): each outcome type, carry-over none/own/cross,
// residual correlation on/off, paths and means free over time, with and
// without random intercepts, a stationary start and heavy missingness. The
// bivariate ones vary one option at a time from an ordinal + binary
// cross-lagged random-intercept base.
func Scenarios() []Scenario {
	one := func(name, outcome string) Scenario {
		return Scenario{Name: name, Model: base("["+outcome+"]", ri, "lags: own", eqM), Persons: 40, Times: 6, Missing: 0.05}
	}
	two := func(name, between, within, means string, missing float64) Scenario {
		return Scenario{Name: name, Model: base(pairOB, between, within, means), Persons: 50, Times: 6, Missing: missing}
	}
	return []Scenario{
		one("binary", "{name: y, type: binary}"),
		one("ordinal K=3", "{name: y, type: ordinal, categories: 3, lowest: 0}"),
		one("ordinal K=7", "{name: y, type: ordinal, categories: 7, lowest: 0}"),
		one("continuous", "{name: y, type: continuous}"),
		{Name: "mixed ordinal+binary+continuous", Model: base(`[{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: binary}, {name: c, type: continuous}]`, ri, cross, eqM), Persons: 50, Times: 6, Missing: 0.05},
		two("carry-over none", ri, "lags: none, residual_correlation: true", eqM, 0.05),
		two("carry-over own", ri, "lags: own, residual_correlation: true", eqM, 0.05),
		two("carry-over cross", ri, cross, eqM, 0.05),
		two("residual correlation off", ri, "lags: cross, residual_correlation: false", eqM, 0.05),
		two("paths free over time", ri, "lags: cross, residual_correlation: true, over_time: free", eqM, 0.05),
		two("means free over time", ri, cross, "over_time: free", 0.05),
		two("no random intercepts", noRI, cross, eqM, 0.05),
		two("stationary start", ri, "lags: cross, residual_correlation: true, first_occasion: stationary", eqM, 0.05),
		two("missing cells 25%", ri, cross, eqM, 0.25),
		two("moving average (ARMA(1,1)), cross-lagged", ri, "lags: cross, residual_correlation: true, moving_average: true", eqM, 0.05),
		two("moving average, paths free over time", ri, "lags: cross, residual_correlation: true, over_time: free, moving_average: true", eqM, 0.05),
		two("moving average without carry-over", ri, "lags: none, residual_correlation: true, moving_average: true", eqM, 0.05),
		{Name: "moving average, continuous, no random intercepts", Model: base("[{name: y, type: continuous}]", noRI, "lags: own, moving_average: true", "over_time: free"), Persons: 40, Times: 6, Missing: 0.05},
		two("growth, cross-lagged residuals", growth, cross, "", 0.05),
		two("growth, paths free over time", growth, "lags: cross, residual_correlation: true, over_time: free", "", 0.05),
		two("growth without carry-over, uneven time scores", growth+", time_scores: [0, 1, 2, 4, 6, 9]", "lags: none, residual_correlation: true", "", 0.05),
		{Name: "growth, binary, AR(1) residuals", Model: base("[{name: y, type: binary}]", growth, "lags: own", ""), Persons: 60, Times: 6, Missing: 0.05},
		{Name: "growth, continuous, AR(1) residuals", Model: base("[{name: y, type: continuous}]", growth, "lags: own", ""), Persons: 40, Times: 6, Missing: 0.05},
		two("lagged latent response, cross-lagged", ri, cross+", lag_on: latent_response", eqM, 0.05),
		two("lagged latent response, paths and intercepts free over time", ri, "lags: cross, residual_correlation: true, over_time: free, lag_on: latent_response", "over_time: free", 0.05),
		two("lagged latent response without random intercepts", noRI, cross+", lag_on: latent_response", eqM, 0.05),
		{Name: "lagged latent response, binary", Model: base("[{name: y, type: binary}]", ri, "lags: own, lag_on: latent_response", eqM), Persons: 60, Times: 6, Missing: 0.05},
		{Name: "lagged latent response, continuous", Model: base("[{name: y, type: continuous}]", ri, "lags: own, lag_on: latent_response", "over_time: free"), Persons: 40, Times: 6, Missing: 0.05},
	}
}
