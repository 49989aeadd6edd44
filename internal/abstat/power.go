package abstat

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// SampleSizeTwoProportions returns the units needed per arm to detect
// p1 ≠ p2 with a two-sided level-alpha test at the given power, by the
// usual normal approximation without continuity correction (common
// practice):
//
//	n = (z_{1−α/2}·sqrt(2·p̄(1−p̄)) + z_{power}·sqrt(p1(1−p1) + p2(1−p2)))² / (p1 − p2)²
//
// with p̄ = (p1+p2)/2, rounded up. p1, p2 in (0,1) and distinct; alpha,
// power in (0,1). O(1).
func SampleSizeTwoProportions(p1, p2, alpha, power float64) (int, error) {
	if err := checkPower(p1, p2, alpha); err != nil {
		return 0, err
	}
	if !(power > 0 && power < 1) {
		return 0, fmt.Errorf("%w: power %v not in (0,1)", ErrInput, power)
	}
	za := distuv.UnitNormal.Quantile(1 - alpha/2)
	zb := distuv.UnitNormal.Quantile(power)
	pb := (p1 + p2) / 2
	num := za*math.Sqrt(2*pb*(1-pb)) + zb*math.Sqrt(p1*(1-p1)+p2*(1-p2))
	n := num * num / ((p1 - p2) * (p1 - p2))
	if n > math.MaxInt32 {
		return 0, fmt.Errorf("%w: effect %v too small (n > 2^31)", ErrInput, p1-p2)
	}
	return int(math.Ceil(n - 1e-9)), nil
}

// PowerTwoProportions is the inverse: the approximate power of the pooled
// two-sided z-test with n units per arm (same approximation, common
// practice):
//
//	power = Φ((|p1−p2|·sqrt(n) − z_{1−α/2}·sqrt(2·p̄(1−p̄))) / sqrt(p1(1−p1) + p2(1−p2))).
//
// The far tail is ignored. O(1).
func PowerTwoProportions(p1, p2, alpha float64, n int) (float64, error) {
	if err := checkPower(p1, p2, alpha); err != nil {
		return 0, err
	}
	if n < 1 {
		return 0, fmt.Errorf("%w: n = %d", ErrInput, n)
	}
	za := distuv.UnitNormal.Quantile(1 - alpha/2)
	pb := (p1 + p2) / 2
	x := (math.Abs(p1-p2)*math.Sqrt(float64(n)) - za*math.Sqrt(2*pb*(1-pb))) / math.Sqrt(p1*(1-p1)+p2*(1-p2))
	return distuv.UnitNormal.CDF(x), nil
}

func checkPower(p1, p2, alpha float64) error {
	if !(p1 > 0 && p1 < 1 && p2 > 0 && p2 < 1) || p1 == p2 {
		return fmt.Errorf("%w: need distinct proportions in (0,1), got %v and %v", ErrInput, p1, p2)
	}
	if !(alpha > 0 && alpha < 1) {
		return fmt.Errorf("%w: alpha %v not in (0,1)", ErrInput, alpha)
	}
	return nil
}
