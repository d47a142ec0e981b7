// Package bvn computes bivariate normal probabilities: upper orthants
// (Drezner & Wesolowsky 1990, J. Statist. Comput. Simul. 35:101, in the
// form of Genz 2004, Statistics and Computing 14:251) and rectangles.
package bvn

import (
	"math"

	"gonum.org/v1/gonum/integrate/quad"
)

// Gauss-Legendre half rules (the points in [-1, 0) and their weights) of
// 6, 12 and 20 points, as the method uses them.
var rules [3]struct{ x, w []float64 }

func init() {
	for k, n := range []int{6, 12, 20} {
		x, w := make([]float64, n), make([]float64, n)
		quad.Legendre{}.FixedLocations(x, w, -1, 1)
		rules[k].x, rules[k].w = x[:n/2], w[:n/2]
	}
}

func phi(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }

// Upper returns P(X > h, Y > k) for standard bivariate normal X, Y with
// correlation r (|r| <= 1); h and k may be infinite.
func Upper(h, k, r float64) float64 {
	switch {
	case math.IsInf(h, 1) || math.IsInf(k, 1):
		return 0
	case math.IsInf(h, -1):
		return phi(-k)
	case math.IsInf(k, -1):
		return phi(-h)
	}
	rule := rules[2]
	switch {
	case math.Abs(r) < 0.3:
		rule = rules[0]
	case math.Abs(r) < 0.75:
		rule = rules[1]
	}
	hk := h * k
	var bvn float64
	if math.Abs(r) < 0.925 {
		hs := (h*h + k*k) / 2
		asr := math.Asin(r)
		for i, xi := range rule.x {
			sn := math.Sin(asr * (1 + xi) / 2)
			bvn += rule.w[i] * math.Exp((sn*hk-hs)/(1-sn*sn))
			sn = math.Sin(asr * (1 - xi) / 2)
			bvn += rule.w[i] * math.Exp((sn*hk-hs)/(1-sn*sn))
		}
		return bvn*asr/(4*math.Pi) + phi(-h)*phi(-k)
	}
	if r < 0 {
		k, hk = -k, -hk
	}
	if math.Abs(r) < 1 {
		as := (1 - r) * (1 + r)
		a := math.Sqrt(as)
		bs := (h - k) * (h - k)
		c := (4 - hk) / 8
		d := (12 - hk) / 16
		bvn = a * math.Exp(-(bs/as+hk)/2) * (1 - c*(bs-as)*(1-d*bs/5)/3 + c*d*as*as/5)
		if hk > -160 {
			b := math.Sqrt(bs)
			bvn -= math.Exp(-hk/2) * math.Sqrt(2*math.Pi) * phi(-b/a) * b * (1 - c*bs*(1-d*bs/5)/3)
		}
		a /= 2
		for i, xi := range rule.x {
			for _, sgn := range []float64{-1, 1} {
				xs := a * (sgn*xi + 1)
				xs *= xs
				rs := math.Sqrt(1 - xs)
				bvn += a * rule.w[i] * (math.Exp(-bs/(2*xs)-hk/(1+rs))/rs - math.Exp(-(bs/xs+hk)/2)*(1+c*xs*(1+d*xs)))
			}
		}
		bvn = -bvn / (2 * math.Pi)
	}
	if r > 0 {
		return bvn + phi(-math.Max(h, k))
	}
	bvn = -bvn
	if k > h {
		bvn += phi(k) - phi(h)
	}
	return bvn
}

// Rect returns P(a1 < X < b1, a2 < Y < b2) for standard bivariate normal
// X, Y with correlation r (bounds may be infinite).
func Rect(a1, b1, a2, b2, r float64) float64 {
	p := Upper(a1, a2, r) - Upper(a1, b2, r) - Upper(b1, a2, r) + Upper(b1, b2, r)
	return math.Max(p, 0)
}
