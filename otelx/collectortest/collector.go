package collectortest

import (
	"context"
	"errors"
	"fmt"
	"net"
	"strconv"

	"github.com/open-telemetry/opentelemetry-collector-contrib/exporter/fileexporter"
	"go.opentelemetry.io/collector/component"
	"go.opentelemetry.io/collector/component/componenttest"
	"go.opentelemetry.io/collector/confmap"
	"go.opentelemetry.io/collector/exporter"
	"go.opentelemetry.io/collector/exporter/exportertest"
	"go.opentelemetry.io/collector/receiver"
	"go.opentelemetry.io/collector/receiver/otlpreceiver"
	"go.opentelemetry.io/collector/receiver/receivertest"
)

// FileConfig is the file exporter's configuration as a user writes it in
// the Collector's YAML (exporters: file: ...), e.g.
//
//	{"path": "traces.jsonl", "append": true, "format": "json"}
type FileConfig map[string]any

// Collector is a running OTLP receiver → file exporter pipeline.
type Collector struct {
	endpoint string
	recv     receiver.Traces
	exp      exporter.Traces
}

// Start builds the pipeline from the components' factories and default
// configurations, overridden the way the Collector applies a YAML file
// (confmap), and starts it: the OTLP/HTTP receiver listens on a free
// loopback port (Endpoint) and hands each request to the file exporter.
func Start(ctx context.Context, file FileConfig) (*Collector, error) {
	port, err := freePort()
	if err != nil {
		return nil, err
	}
	c := &Collector{endpoint: net.JoinHostPort("127.0.0.1", strconv.Itoa(port))}

	ef := fileexporter.NewFactory()
	ecfg := ef.CreateDefaultConfig()
	if err := configure(ecfg, file); err != nil {
		return nil, fmt.Errorf("file exporter: %w", err)
	}
	if c.exp, err = ef.CreateTraces(ctx, exportertest.NewNopSettings(ef.Type()), ecfg); err != nil {
		return nil, fmt.Errorf("file exporter: %w", err)
	}

	rf := otlpreceiver.NewFactory()
	rcfg := rf.CreateDefaultConfig()
	if err := configure(rcfg, map[string]any{"protocols": map[string]any{"http": map[string]any{"endpoint": c.endpoint}}}); err != nil {
		return nil, fmt.Errorf("otlp receiver: %w", err)
	}
	if c.recv, err = rf.CreateTraces(ctx, receivertest.NewNopSettings(rf.Type()), rcfg, c.exp); err != nil {
		return nil, fmt.Errorf("otlp receiver: %w", err)
	}

	host := componenttest.NewNopHost()
	if err := c.exp.Start(ctx, host); err != nil {
		return nil, fmt.Errorf("file exporter: %w", err)
	}
	if err := c.recv.Start(ctx, host); err != nil {
		return nil, errors.Join(fmt.Errorf("otlp receiver: %w", err), c.exp.Shutdown(ctx))
	}
	return c, nil
}

// configure applies settings to a component's default configuration as
// the Collector does with its YAML, and validates the result.
func configure(cfg component.Config, settings map[string]any) error {
	if err := confmap.NewFromStringMap(settings).Unmarshal(cfg); err != nil {
		return err
	}
	if v, ok := cfg.(interface{ Validate() error }); ok {
		return v.Validate()
	}
	return nil
}

// freePort asks the kernel for a free loopback TCP port. The receiver
// binds it again right after, so another process could take it in
// between; on a test machine that is rare enough.
func freePort() (int, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, err
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port, nil
}

// Endpoint is the receiver's OTLP/HTTP address, host:port.
func (c *Collector) Endpoint() string { return c.endpoint }

// Shutdown stops the receiver, then the exporter, which flushes the file.
func (c *Collector) Shutdown(ctx context.Context) error {
	return errors.Join(c.recv.Shutdown(ctx), c.exp.Shutdown(ctx))
}
