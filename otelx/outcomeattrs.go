package otelx

import (
	"fmt"

	"go.opentelemetry.io/otel/attribute"
)

// OutcomeOption configures one RecordOutcome call.
type OutcomeOption interface{ applyOutcome(*outcomeConfig) }

type outcomeConfig struct {
	attrs []attribute.KeyValue
}

type outcomeOptionFunc func(*outcomeConfig)

func (f outcomeOptionFunc) applyOutcome(c *outcomeConfig) { f(c) }

// WithOutcomeAttributes puts attrs on the outcome span beside its hopwise.*
// attributes, for example the OpenTelemetry GenAI attributes of the model
// call the outcome is about (gen_ai.request.model, gen_ai.usage.*), so
// that a trace backend can group outcomes by model without joining them to
// another span. Given several times, the lists add up.
//
// The attributes are recorded as given: WithEntityHashKey does not hash
// them, so they must not carry entity names the gateway keeps private.
// RecordOutcome rejects (ErrBadOutcome, nothing recorded) an attribute
// whose key is empty, whose value is unset, or whose key is one that
// otelx sets or reads on its spans (the Key* constants): those keys are
// what hopwise tune and hopwise ab read, and a caller's value would
// replace the recorded one. Cost: O(len(attrs)) per call; nothing when
// the span is not recording.
func WithOutcomeAttributes(attrs ...attribute.KeyValue) OutcomeOption {
	return outcomeOptionFunc(func(c *outcomeConfig) { c.attrs = append(c.attrs, attrs...) })
}

// reservedKeys are the attribute keys otelx sets or reads on its spans.
var reservedKeys = map[attribute.Key]bool{
	KeyQueryKey: true, KeyQueryFrom: true, KeyQueryValue: true, KeyQueryTo: true,
	KeyRouteMode: true, KeyRouteGain: true, KeyRouteScore: true, KeyRouteReason: true, KeyRouteTruncated: true,
	KeyRoutePropensity: true, KeyRouteExplored: true, KeyRouteCached: true,
	KeyDirectErr: true, KeyDirectSupport: true, KeyChainErr: true, KeyChainHops: true, KeyChainBridges: true, KeyChainParallel: true, KeyChainMidpoint: true,
	KeyABArm: true, KeyIndexGeneration: true, KeySamplingRatio: true, KeyEntityHash: true,
	KeyOutcomeScore: true, KeyOutcomeInputTokens: true, KeyOutcomeOutputTokens: true, KeyOutcomeLatencyMs: true,
}

// checkOutcomeAttrs validates the attributes of WithOutcomeAttributes.
func checkOutcomeAttrs(attrs []attribute.KeyValue) error {
	for i, kv := range attrs {
		switch {
		case kv.Key == "":
			return fmt.Errorf("%w: outcome attribute %d has an empty key", ErrBadOutcome, i)
		case kv.Value.Type() == attribute.INVALID:
			return fmt.Errorf("%w: outcome attribute %q has no value", ErrBadOutcome, kv.Key)
		case reservedKeys[kv.Key]:
			return fmt.Errorf("%w: outcome attribute %q is set by otelx", ErrBadOutcome, kv.Key)
		}
	}
	return nil
}
