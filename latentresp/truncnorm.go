package latentresp

import (
	"math"
	"math/rand/v2"
)

// Constants of the hybrid sampler.
const (
	// halfNormalCut is the lower bound below which a one-sided interval
	// [a, b] with a >= 0 is sampled by half-normal rejection rather than by
	// exponential rejection (Chopin 2011 uses a similar cut near 0.25).
	halfNormalCut = 0.25
	// sqrt2Pi is the width beyond which an interval holding zero is sampled
	// by plain normal rejection rather than uniform rejection (Robert 1995, §2.2).
	sqrt2Pi = 2.5066282746310002
)

// TruncStdNormal returns a draw from the standard normal distribution
// truncated to the interval (a, b). Either end may be infinite; a must be
// less than b. The draw is exact in the far tails (no inverse-CDF
// arithmetic is used): the method is the hybrid accept-reject scheme of
// Robert (1995, Statistics and Computing 5:121), choosing for each interval
// among normal, half-normal, uniform and translated-exponential proposals.
//
// rng is used by one goroutine at a time; the function allocates nothing.
func TruncStdNormal(rng *rand.Rand, a, b float64) float64 {
	switch {
	case a >= 0:
		return truncPositive(rng, a, b)
	case b <= 0:
		return -truncPositive(rng, -b, -a)
	}
	// a < 0 < b: the interval holds the mode.
	if b-a >= sqrt2Pi {
		for {
			z := rng.NormFloat64()
			if z > a && z < b {
				return z
			}
		}
	}
	for {
		z := a + (b-a)*rng.Float64()
		if z == a {
			continue
		}
		if rng.Float64() <= math.Exp(-0.5*z*z) {
			return z
		}
	}
}

// truncPositive draws from N(0,1) truncated to (a, b) with 0 <= a < b.
func truncPositive(rng *rand.Rand, a, b float64) float64 {
	// Optimal rate of the translated exponential proposal (Robert 1995, Prop. 2.3).
	lambda := 0.5 * (a + math.Sqrt(a*a+4))
	if !math.IsInf(b, 1) {
		// Uniform rejection wins when the interval is short relative to the
		// exponential's scale (Robert 1995, §2.3 comparison of acceptance rates).
		uniformWidth := 2 * math.Sqrt(math.E) / (a + math.Sqrt(a*a+4)) * math.Exp(0.25*(a*a-a*math.Sqrt(a*a+4)))
		if a < halfNormalCut {
			// Half-normal acceptance is P(a<|Z|<b); prefer uniform only for
			// narrow intervals.
			if b-a < uniformWidth && b-a < 0.5 {
				return uniformRejection(rng, a, b)
			}
		} else if b-a <= uniformWidth {
			return uniformRejection(rng, a, b)
		}
	}
	if a < halfNormalCut {
		for {
			z := math.Abs(rng.NormFloat64())
			if z > a && z < b {
				return z
			}
		}
	}
	for {
		z := a + rng.ExpFloat64()/lambda
		if z >= b {
			continue
		}
		d := z - lambda
		if rng.Float64() <= math.Exp(-0.5*d*d) {
			return z
		}
	}
}

// uniformRejection draws from N(0,1) on (a, b), 0 <= a, by uniform proposals
// accepted with probability exp((a^2 - z^2)/2).
func uniformRejection(rng *rand.Rand, a, b float64) float64 {
	for {
		z := a + (b-a)*rng.Float64()
		if z <= a {
			continue
		}
		if rng.Float64() <= math.Exp(0.5*(a-z)*(a+z)) {
			return z
		}
	}
}

// TruncNormal returns a draw from N(mean, sd^2) truncated to (lo, hi).
func TruncNormal(rng *rand.Rand, mean, sd, lo, hi float64) float64 {
	return mean + sd*TruncStdNormal(rng, (lo-mean)/sd, (hi-mean)/sd)
}
