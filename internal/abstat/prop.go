package abstat

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// ErrInput is wrapped by every error about invalid arguments (counts out of
// range, confidence outside (0,1), too few observations...).
var ErrInput = errors.New("abstat: invalid input")

// Interval is a point estimate with a two-sided confidence interval.
type Interval struct {
	Est float64 `json:"est"`
	Lo  float64 `json:"lo"`
	Hi  float64 `json:"hi"`
}

// Contains reports whether x lies in [Lo, Hi].
func (iv Interval) Contains(x float64) bool { return iv.Lo <= x && x <= iv.Hi }

func (iv Interval) String() string { return fmt.Sprintf("%.4g [%.4g, %.4g]", iv.Est, iv.Lo, iv.Hi) }

// zQuantile returns z_{1−(1−conf)/2}, the two-sided normal critical value.
func zQuantile(conf float64) (float64, error) {
	if !(conf > 0 && conf < 1) {
		return 0, fmt.Errorf("%w: confidence %v not in (0,1)", ErrInput, conf)
	}
	return distuv.UnitNormal.Quantile(1 - (1-conf)/2), nil
}

func checkCount(x, n int) error {
	if n <= 0 || x < 0 || x > n {
		return fmt.Errorf("%w: need 0 ≤ successes ≤ trials and trials > 0, got %d/%d", ErrInput, x, n)
	}
	return nil
}

// Wilson returns the Wilson score interval for x successes in n trials:
//
//	(2np̂ + z² ± z·sqrt(z² + 4np̂(1−p̂))) / (2(n + z²)),  p̂ = x/n,
//
// z the two-sided normal critical value for conf (Newcombe 1998, Stat Med
// 17:857, method 3). Unlike the Wald interval it stays inside [0,1] and is
// not degenerate at x = 0 or x = n. O(1).
func Wilson(x, n int, conf float64) (Interval, error) {
	if err := checkCount(x, n); err != nil {
		return Interval{}, err
	}
	z, err := zQuantile(conf)
	if err != nil {
		return Interval{}, err
	}
	lo, hi := wilson(float64(x), float64(n), z)
	return Interval{Est: float64(x) / float64(n), Lo: lo, Hi: hi}, nil
}

func wilson(x, n, z float64) (lo, hi float64) {
	p := x / n
	z2 := z * z
	c := 2*n*p + z2
	d := z * math.Sqrt(z2+4*n*p*(1-p))
	e := 2 * (n + z2)
	lo, hi = (c-d)/e, (c+d)/e
	// Exact ends at the boundaries (rounding can leave ±1e-17).
	if x == 0 {
		lo = 0
	}
	if x == n {
		hi = 1
	}
	return lo, hi
}

// NewcombeDiff returns the hybrid score interval for p1 − p2 of two
// independent proportions x1/n1 and x2/n2 (Newcombe 1998, Stat Med 17:873,
// method 10): with Wilson limits (l1,u1) and (l2,u2),
//
//	δ̂ − sqrt((p̂1−l1)² + (u2−p̂2)²)  …  δ̂ + sqrt((u1−p̂1)² + (p̂2−l2)²).
//
// O(1).
func NewcombeDiff(x1, n1, x2, n2 int, conf float64) (Interval, error) {
	if err := checkCount(x1, n1); err != nil {
		return Interval{}, err
	}
	if err := checkCount(x2, n2); err != nil {
		return Interval{}, err
	}
	z, err := zQuantile(conf)
	if err != nil {
		return Interval{}, err
	}
	p1, p2 := float64(x1)/float64(n1), float64(x2)/float64(n2)
	l1, u1 := wilson(float64(x1), float64(n1), z)
	l2, u2 := wilson(float64(x2), float64(n2), z)
	d := p1 - p2
	return Interval{
		Est: d,
		Lo:  d - math.Sqrt((p1-l1)*(p1-l1)+(u2-p2)*(u2-p2)),
		Hi:  d + math.Sqrt((u1-p1)*(u1-p1)+(p2-l2)*(p2-l2)),
	}, nil
}

// ZTest is the result of a two-sided test.
type ZTest struct {
	Z float64 `json:"z"`
	P float64 `json:"p"` // two-sided p-value
}

// TwoProportionZ is the pooled two-proportion z-test of H0: p1 = p2
// (NIST/SEMATECH e-Handbook §7.3.3):
//
//	z = (p̂1 − p̂2) / sqrt(p̂(1−p̂)(1/n1 + 1/n2)),  p̂ = (x1+x2)/(n1+n2),
//
// with a two-sided normal p-value. When p̂ is 0 or 1 both arms agree
// exactly and z = 0, p = 1. O(1).
func TwoProportionZ(x1, n1, x2, n2 int) (ZTest, error) {
	if err := checkCount(x1, n1); err != nil {
		return ZTest{}, err
	}
	if err := checkCount(x2, n2); err != nil {
		return ZTest{}, err
	}
	p1, p2 := float64(x1)/float64(n1), float64(x2)/float64(n2)
	p := float64(x1+x2) / float64(n1+n2)
	se := math.Sqrt(p * (1 - p) * (1/float64(n1) + 1/float64(n2)))
	if se == 0 {
		return ZTest{Z: 0, P: 1}, nil
	}
	z := (p1 - p2) / se
	return ZTest{Z: z, P: 2 * distuv.UnitNormal.Survival(math.Abs(z))}, nil
}
