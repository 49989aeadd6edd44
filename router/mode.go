package router

import (
	"errors"
	"fmt"
)

// Mode is the routing outcome of a decision: answer directly, or answer by
// chaining local conditionals through bridge entities.
type Mode uint8

const (
	// ModeDirect answers from the pair's own statistics.
	ModeDirect Mode = iota
	// ModeChain answers through the decision's bridges.
	ModeChain
)

// String returns "direct" or "chain".
func (m Mode) String() string {
	switch m {
	case ModeDirect:
		return "direct"
	case ModeChain:
		return "chain"
	}
	return fmt.Sprintf("Mode(%d)", uint8(m))
}

// MarshalText implements encoding.TextMarshaler with the String form.
func (m Mode) MarshalText() ([]byte, error) {
	if m > ModeChain {
		return nil, fmt.Errorf("router: invalid mode %d", uint8(m))
	}
	return []byte(m.String()), nil
}

// UnmarshalText implements encoding.TextUnmarshaler; it accepts "direct"
// and "chain".
func (m *Mode) UnmarshalText(b []byte) error {
	v, err := ParseMode(string(b))
	if err != nil {
		return err
	}
	*m = v
	return nil
}

// ParseMode parses "direct" or "chain".
func ParseMode(s string) (Mode, error) {
	switch s {
	case "direct":
		return ModeDirect, nil
	case "chain":
		return ModeChain, nil
	}
	return 0, fmt.Errorf("router: unknown mode %q (want direct or chain)", s)
}

// Sentinel errors of Decide. Returned errors wrap them together with the
// offending name, so test with errors.Is.
var (
	// ErrUnknownEntity: the query's From or To entity is not in the index.
	ErrUnknownEntity = errors.New("router: unknown entity")
	// ErrUnknownValue: the observed value is not a value of the From entity.
	ErrUnknownValue = errors.New("router: unknown value")
	// ErrSameEntity: From and To name the same entity.
	ErrSameEntity = errors.New("router: from and to are the same entity")
	// ErrClosed: the router was closed.
	ErrClosed = errors.New("router: closed")
)

// Reason codes. They are stable identifiers that telemetry, tuning and
// downstream tools match on; the texts may change.
const (
	// ReasonGainAbove: the routed policy chose the chain because its score
	// (the gain, or the utility when configured) reached the threshold.
	ReasonGainAbove = "gain-above-threshold"
	// ReasonGainBelow: a chain was found but its score stayed below the
	// threshold, so the routed policy answers directly.
	ReasonGainBelow = "gain-below-threshold"
	// ReasonNoChain: no chain of at most H bridges was found; direct.
	ReasonNoChain = "no-chain"
	// ReasonUnknownEntityFallback: an endpoint is not in the index and the
	// configured fallback mode was returned instead of an error.
	ReasonUnknownEntityFallback = "unknown-entity-fallback"
	// ReasonUnknownValueFallback: the observed value is unknown and the
	// configured fallback mode was returned instead of an error.
	ReasonUnknownValueFallback = "unknown-value-fallback"
	// ReasonArmDirectOnly: the unit is in the direct-only A/B arm.
	ReasonArmDirectOnly = "arm-direct-only"
	// ReasonArmChainAlways: the unit is in the chain-always A/B arm and a
	// chain exists.
	ReasonArmChainAlways = "arm-chain-always"
	// ReasonExplore: exploration picked the mode the policy did not prefer.
	ReasonExplore = "explore"
)

var reasonText = map[string]string{
	ReasonGainAbove:             "the best chain's estimated error reduction reaches the threshold",
	ReasonGainBelow:             "a chain was found but its estimated error reduction is below the threshold",
	ReasonNoChain:               "no chain within the hop, beam and budget bounds links the endpoints",
	ReasonUnknownEntityFallback: "an endpoint is not in the index; the configured fallback mode applies",
	ReasonUnknownValueFallback:  "the observed value is not known for this entity; the configured fallback mode applies",
	ReasonArmDirectOnly:         "A/B arm direct-only always answers directly",
	ReasonArmChainAlways:        "A/B arm chain-always answers through the best chain",
	ReasonExplore:               "exploration chose the mode the policy did not prefer",
}

// Reason explains a decision: a stable machine code and a human text.
type Reason struct {
	Code string `json:"code"`
	Text string `json:"text"`
}

func reason(code string) Reason { return Reason{Code: code, Text: reasonText[code]} }
