package sampler

import "gonum.org/v1/gonum/mathext"

func normalQuantile(p float64) float64 { return mathext.NormalQuantile(p) }
