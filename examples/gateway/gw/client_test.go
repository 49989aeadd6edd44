package gw_test

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/examples/gateway/gw"
	"github.com/hopwise/hopwise/examples/gateway/simmodel"
	"github.com/openai/openai-go/v3"
	"github.com/openai/openai-go/v3/option"
)

// client is the official chat-completions client pointed at the gateway,
// with retries off so every status reaches the test.
func client(r *rig, opts ...option.RequestOption) openai.Client {
	return openai.NewClient(append([]option.RequestOption{option.WithBaseURL(r.url + "/v1/"),
		option.WithAPIKey("test-key"), option.WithMaxRetries(0)}, opts...)...)
}

func params(q string) openai.ChatCompletionNewParams {
	return openai.ChatCompletionNewParams{Model: "greenhouse-sim",
		Messages: []openai.ChatCompletionMessageParamUnion{openai.UserMessage(q)}}
}

// TestClientNonStreaming: a routed request through the official client.
func TestClientNonStreaming(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	c := client(r)
	var resp *http.Response
	cc, err := c.Chat.Completions.New(context.Background(), params(farQuestion),
		option.WithHeader(gw.HeaderUnit, "client-1"), option.WithResponseInto(&resp))
	if err != nil {
		t.Fatal(err)
	}
	if resp.Header.Get(gw.HeaderRoute) != "chain" {
		t.Errorf("route %q", resp.Header.Get(gw.HeaderRoute))
	}
	if len(cc.Choices) != 1 || cc.Model != "greenhouse-sim" || cc.Usage.PromptTokens <= 0 || cc.Usage.CompletionTokens <= 0 {
		t.Fatalf("completion %+v", cc)
	}
	if _, ok := simmodel.ParseAnswer(cc.Choices[0].Message.Content); !ok {
		t.Errorf("no answer in %q", cc.Choices[0].Message.Content)
	}
	if !strings.Contains(string(r.lastBody()), `"role":"system"`) {
		t.Error("the plan did not reach the upstream")
	}
	// The outcome joins: the gateway kept the usage the upstream reported.
	if code, b, _ := post(t, r.url+"/v1/outcomes", `{"unit":"client-1","score":1}`); code != 200 {
		t.Errorf("outcome: %d %s", code, b)
	}
}

// TestClientStreaming: SSE through the gateway, with the usage chunk the
// client asked for, recorded by the gateway on its span.
func TestClientStreaming(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	c := client(r)
	p := params(farQuestion)
	p.StreamOptions = openai.ChatCompletionStreamOptionsParam{IncludeUsage: openai.Bool(true)}
	st := c.Chat.Completions.NewStreaming(context.Background(), p, option.WithHeader(gw.HeaderUnit, "stream-1"))
	var acc openai.ChatCompletionAccumulator
	chunks := 0
	for st.Next() {
		acc.AddChunk(st.Current())
		chunks++
	}
	if err := st.Err(); err != nil {
		t.Fatal(err)
	}
	st.Close()
	if chunks < 4 {
		t.Errorf("%d chunks: not streamed", chunks)
	}
	if len(acc.Choices) != 1 || !strings.Contains(acc.Choices[0].Message.Content, "Step 1:") {
		t.Fatalf("accumulated %+v", acc.Choices)
	}
	if acc.Usage.PromptTokens <= 0 || acc.Usage.CompletionTokens <= 0 {
		t.Fatalf("no usage chunk: %+v", acc.Usage)
	}
	var in, out int64 = -1, -1
	for _, s := range r.endedSpans(t, "chat greenhouse-sim") {
		if s.Name == "chat greenhouse-sim" {
			for _, a := range s.Attributes {
				switch a.Key {
				case gw.KeyGenAIInputTokens:
					in = a.Value.AsInt64()
				case gw.KeyGenAIOutputTokens:
					out = a.Value.AsInt64()
				}
			}
		}
	}
	if in != acc.Usage.PromptTokens || out != acc.Usage.CompletionTokens {
		t.Errorf("span usage %d/%d, stream usage %d/%d", in, out, acc.Usage.PromptTokens, acc.Usage.CompletionTokens)
	}
}

// TestClientUpstreamErrors: upstream 429 and 500 reach the client as
// such, with their body; an upstream timeout is a 504.
func TestClientUpstreamErrors(t *testing.T) {
	t.Parallel()
	for _, status := range []int{429, 500} {
		r := newRig(t, gw.Config{}, http.HandlerFunc(func(w http.ResponseWriter, _ *http.Request) {
			w.Header().Set("Content-Type", "application/json")
			w.WriteHeader(status)
			io.WriteString(w, `{"error":{"message":"simulated failure","type":"server_error","code":"sim"}}`)
		}))
		c := client(r)
		_, err := c.Chat.Completions.New(context.Background(), params(farQuestion))
		var ae *openai.Error
		if !errors.As(err, &ae) || ae.StatusCode != status || ae.Message != "simulated failure" {
			t.Errorf("upstream %d: client got %v", status, err)
		}
	}
	slow := newRig(t, gw.Config{UpstreamTimeout: 100 * time.Millisecond}, http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		select {
		case <-time.After(5 * time.Second):
		case <-r.Context().Done():
		}
	}))
	sc := client(slow)
	_, err := sc.Chat.Completions.New(context.Background(), params(farQuestion))
	var ae *openai.Error
	if !errors.As(err, &ae) || ae.StatusCode != http.StatusGatewayTimeout {
		t.Errorf("upstream timeout: client got %v", err)
	}
}

// TestClientPassThrough: a prompt that links nothing goes through
// untouched and is answered.
func TestClientPassThrough(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	var resp *http.Response
	c := client(r)
	cc, err := c.Chat.Completions.New(context.Background(), params(plainQuestion), option.WithResponseInto(&resp))
	if err != nil {
		t.Fatal(err)
	}
	if resp.Header.Get(gw.HeaderRoute) != "pass" || resp.Header.Get(gw.HeaderReason) != gw.PassNoMention {
		t.Errorf("route %q reason %q", resp.Header.Get(gw.HeaderRoute), resp.Header.Get(gw.HeaderReason))
	}
	if strings.Contains(string(r.lastBody()), `"system"`) || len(cc.Choices) != 1 {
		t.Errorf("pass-through changed the request or lost the answer: %s", r.lastBody())
	}
}

// TestOutcomeRightAfterAnswer: a client that posts its outcome the moment
// it holds the whole answer (the last stream chunk, or the JSON body) finds
// its decision waiting, every time: the gateway keeps the decision before
// the answer's last bytes leave.
func TestOutcomeRightAfterAnswer(t *testing.T) {
	t.Parallel()
	r := newRig(t, gw.Config{}, nil)
	c := client(r)
	for i := range 40 {
		unit := fmt.Sprintf("quick-%d", i)
		p := params(farQuestion)
		if i%2 == 0 {
			p.StreamOptions = openai.ChatCompletionStreamOptionsParam{IncludeUsage: openai.Bool(true)}
			st := c.Chat.Completions.NewStreaming(context.Background(), p, option.WithHeader(gw.HeaderUnit, unit))
			for st.Next() {
			}
			if err := st.Err(); err != nil {
				t.Fatal(err)
			}
			st.Close()
		} else if _, err := c.Chat.Completions.New(context.Background(), p, option.WithHeader(gw.HeaderUnit, unit)); err != nil {
			t.Fatal(err)
		}
		if code, b, _ := post(t, r.url+"/v1/outcomes", `{"unit":"`+unit+`","score":1}`); code != 200 {
			t.Fatalf("answer %d (stream %v): outcome %d %s", i, i%2 == 0, code, b)
		}
	}
}
