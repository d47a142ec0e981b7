// Package dense holds allocation-free routines for the small symmetric and
// square matrices of a Gibbs sweep (J x J with J <= 6, plus the banded
// precision matrices of the mean block). Matrices are row-major []float64
// slices with an explicit order n; callers own every buffer.
package dense

import "math"

// Cholesky overwrites the lower triangle of the n x n symmetric matrix a with
// its Cholesky factor L (a = L L') and zeroes the strict upper triangle. It
// reports false when a is not numerically positive definite.
func Cholesky(a []float64, n int) bool {
	for j := 0; j < n; j++ {
		s := a[j*n+j]
		for k := 0; k < j; k++ {
			s -= a[j*n+k] * a[j*n+k]
		}
		if !(s > 0) || math.IsInf(s, 0) {
			return false
		}
		d := math.Sqrt(s)
		a[j*n+j] = d
		for i := j + 1; i < n; i++ {
			s := a[i*n+j]
			for k := 0; k < j; k++ {
				s -= a[i*n+k] * a[j*n+k]
			}
			a[i*n+j] = s / d
		}
		for i := 0; i < j; i++ {
			a[i*n+j] = 0
		}
	}
	return true
}

// LogDetChol returns log det(L L') for a Cholesky factor L.
func LogDetChol(l []float64, n int) float64 {
	s := 0.0
	for i := 0; i < n; i++ {
		s += math.Log(l[i*n+i])
	}
	return 2 * s
}

// SolveLower solves L x = b in place (b becomes x) for lower-triangular L.
func SolveLower(l []float64, n int, b []float64) {
	for i := 0; i < n; i++ {
		s := b[i]
		for k := 0; k < i; k++ {
			s -= l[i*n+k] * b[k]
		}
		b[i] = s / l[i*n+i]
	}
}

// SolveUpperT solves L' x = b in place for lower-triangular L.
func SolveUpperT(l []float64, n int, b []float64) {
	for i := n - 1; i >= 0; i-- {
		s := b[i]
		for k := i + 1; k < n; k++ {
			s -= l[k*n+i] * b[k]
		}
		b[i] = s / l[i*n+i]
	}
}

// InverseFromChol writes (L L')^{-1} into dst using work (length n) as scratch.
func InverseFromChol(dst, l []float64, n int, work []float64) {
	for c := 0; c < n; c++ {
		for i := range n {
			work[i] = 0
		}
		work[c] = 1
		SolveLower(l, n, work)
		SolveUpperT(l, n, work)
		for i := 0; i < n; i++ {
			dst[i*n+c] = work[i]
		}
	}
}

// Inverse writes the inverse of the symmetric positive-definite a into dst,
// using chol (n*n) and work (n) as scratch. It reports false when a is not
// positive definite; dst is then unchanged.
func Inverse(dst, a []float64, n int, chol, work []float64) bool {
	copy(chol, a[:n*n])
	if !Cholesky(chol, n) {
		return false
	}
	InverseFromChol(dst, chol, n, work)
	return true
}

// Mul writes a (n x m) times b (m x p) into dst (n x p); dst must not alias.
func Mul(dst, a, b []float64, n, m, p int) {
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			s := 0.0
			for k := 0; k < m; k++ {
				s += a[i*m+k] * b[k*p+j]
			}
			dst[i*p+j] = s
		}
	}
}

// MulTA writes a' (a is m x n) times b (m x p) into dst (n x p).
func MulTA(dst, a, b []float64, m, n, p int) {
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			s := 0.0
			for k := 0; k < m; k++ {
				s += a[k*n+i] * b[k*p+j]
			}
			dst[i*p+j] = s
		}
	}
}

// MulBT writes a (n x m) times b' (b is p x m) into dst (n x p).
func MulBT(dst, a, b []float64, n, m, p int) {
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			s := 0.0
			for k := 0; k < m; k++ {
				s += a[i*m+k] * b[j*m+k]
			}
			dst[i*p+j] = s
		}
	}
}

// MulVec writes a (n x m) times x into dst (length n).
func MulVec(dst, a, x []float64, n, m int) {
	for i := 0; i < n; i++ {
		s := 0.0
		for k := 0; k < m; k++ {
			s += a[i*m+k] * x[k]
		}
		dst[i] = s
	}
}

// Quad returns x' a x for an n x n matrix a.
func Quad(a, x []float64, n int) float64 {
	s := 0.0
	for i := 0; i < n; i++ {
		r := 0.0
		for k := 0; k < n; k++ {
			r += a[i*n+k] * x[k]
		}
		s += x[i] * r
	}
	return s
}

// TraceProd returns tr(a b) for n x n matrices a and b.
func TraceProd(a, b []float64, n int) float64 {
	s := 0.0
	for i := 0; i < n; i++ {
		for k := 0; k < n; k++ {
			s += a[i*n+k] * b[k*n+i]
		}
	}
	return s
}

// Identity sets the n x n matrix a to the identity.
func Identity(a []float64, n int) {
	for i := range a[:n*n] {
		a[i] = 0
	}
	for i := 0; i < n; i++ {
		a[i*n+i] = 1
	}
}

// SpectralRadiusBelowOne reports whether every eigenvalue of the n x n matrix
// a lies strictly inside the unit circle. It checks that the discrete
// Lyapunov recursion V <- a V a' + I converges, using Gelfand's formula on
// repeated squaring of a (no allocation; work needs 3*n*n).
func SpectralRadiusBelowOne(a []float64, n int, work []float64) bool {
	p := work[:n*n]
	q := work[n*n : 2*n*n]
	copy(p, a[:n*n])
	// ||A^(2^k)||^(1/2^k) -> rho(A). After 12 squarings (power 4096) the
	// Frobenius bound is tight enough to separate rho < 1 - 1e-3 from rho >= 1.
	for k := 0; k < 12; k++ {
		Mul(q, p, p, n, n, n)
		copy(p, q)
		f := 0.0
		for _, v := range p {
			f += v * v
		}
		if f < 1e-20 {
			return true
		}
		if f > 1e20 || math.IsNaN(f) {
			return false
		}
	}
	f := 0.0
	for _, v := range p {
		f += v * v
	}
	return f < 1
}

// StationaryCov solves v = a v a' + s (the stationary covariance of a stable
// VAR(1) with innovation covariance s) by doubling: v = sum_k a^k s a'^k.
// work needs 3*n*n. It reports false when the series does not converge.
func StationaryCov(v, a, s []float64, n int, work []float64) bool {
	ak := work[:n*n]
	t1 := work[n*n : 2*n*n]
	t2 := work[2*n*n : 3*n*n]
	copy(v, s[:n*n])
	copy(ak, a[:n*n])
	// Doubling (Smith's method): V_{k+1} = V_k + A_k V_k A_k', A_{k+1} = A_k^2.
	for it := 0; it < 60; it++ {
		Mul(t1, ak, v, n, n, n)
		MulBT(t2, t1, ak, n, n, n)
		inc := 0.0
		for i := range t2 {
			v[i] += t2[i]
			inc += math.Abs(t2[i])
		}
		if math.IsNaN(inc) || math.IsInf(inc, 0) {
			return false
		}
		if inc < 1e-14*(1+math.Abs(v[0])) {
			return true
		}
		Mul(t1, ak, ak, n, n, n)
		copy(ak, t1)
	}
	return false
}

// EnvelopeCholesky factors the symmetric positive-definite p x p matrix a
// (row-major, lower triangle used) in place, touching only each row's
// envelope: first[i] is the column of the first nonzero in row i of the
// lower triangle, and the factor keeps that profile (skyline Cholesky;
// George & Liu 1981). Banded precisions, such as those of occasion means
// under a VAR(1) (Chan & Jeliazkov 2009), factor in O(p * band^2).
// It reports false when a is not numerically positive definite.
func EnvelopeCholesky(a []float64, p int, first []int) bool {
	for i := 0; i < p; i++ {
		fi := first[i]
		for j := fi; j <= i; j++ {
			s := a[i*p+j]
			for k := max(fi, first[j]); k < j; k++ {
				s -= a[i*p+k] * a[j*p+k]
			}
			if j < i {
				a[i*p+j] = s / a[j*p+j]
				continue
			}
			if !(s > 0) {
				return false
			}
			a[i*p+i] = math.Sqrt(s)
		}
	}
	return true
}

// EnvelopeSolveLower solves L x = b in place for a factor from EnvelopeCholesky.
func EnvelopeSolveLower(l []float64, p int, first []int, b []float64) {
	for i := 0; i < p; i++ {
		s := b[i]
		for k := first[i]; k < i; k++ {
			s -= l[i*p+k] * b[k]
		}
		b[i] = s / l[i*p+i]
	}
}

// EnvelopeSolveUpperT solves L' x = b in place for a factor from EnvelopeCholesky.
func EnvelopeSolveUpperT(l []float64, p int, first []int, b []float64) {
	for i := p - 1; i >= 0; i-- {
		b[i] /= l[i*p+i]
		x := b[i]
		for k := first[i]; k < i; k++ {
			b[k] -= l[i*p+k] * x
		}
	}
}

// SolveGeneral solves a x = b for a general (not necessarily symmetric)
// n x n matrix a by Gaussian elimination with partial pivoting, writing x
// over b; work holds n*n values (a is left unchanged). It returns false
// when a is singular to working precision.
func SolveGeneral(a []float64, n int, b, work []float64) bool {
	m := work[:n*n]
	copy(m, a[:n*n])
	scale := 0.0
	for _, v := range m {
		scale = max(scale, math.Abs(v))
	}
	for c := 0; c < n; c++ {
		p := c
		for r := c + 1; r < n; r++ {
			if math.Abs(m[r*n+c]) > math.Abs(m[p*n+c]) {
				p = r
			}
		}
		if !(math.Abs(m[p*n+c]) > 1e-13*scale) {
			return false
		}
		if p != c {
			for k := 0; k < n; k++ {
				m[c*n+k], m[p*n+k] = m[p*n+k], m[c*n+k]
			}
			b[c], b[p] = b[p], b[c]
		}
		for r := c + 1; r < n; r++ {
			f := m[r*n+c] / m[c*n+c]
			for k := c; k < n; k++ {
				m[r*n+k] -= f * m[c*n+k]
			}
			b[r] -= f * b[c]
		}
	}
	for r := n - 1; r >= 0; r-- {
		v := b[r]
		for k := r + 1; k < n; k++ {
			v -= m[r*n+k] * b[k]
		}
		b[r] = v / m[r*n+r]
	}
	return true
}
