package otlpfile

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"strconv"
	"sync"

	"go.opentelemetry.io/otel/exporters/otlp/otlptrace"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"
)

// ErrNotStarted is returned by UploadTraces before Start.
var ErrNotStarted = errors.New("otlpfile: client not started")

// ErrStopped is returned by UploadTraces and Start after Stop.
var ErrStopped = errors.New("otlpfile: client stopped")

// ErrBadOption is wrapped by NewClient for an invalid option value.
var ErrBadOption = errors.New("otlpfile: invalid option")

// DefaultMaxBackups is the number of rotated files kept when rotation is
// on and WithMaxBackups is not given.
const DefaultMaxBackups = 10

// Option configures a Client.
type Option interface{ apply(*config) }

type optionFunc func(*config)

func (f optionFunc) apply(c *config) { f(c) }

type config struct {
	maxBytes   int64
	maxBackups int
	syncEach   bool
	perm       fs.FileMode
}

// WithMaxBytes rotates the file before a line would make it larger than n
// bytes. n = 0 (the default) never rotates. A single line longer than n is
// still written whole, alone in a fresh file. n < 0 is an error.
func WithMaxBytes(n int64) Option { return optionFunc(func(c *config) { c.maxBytes = n }) }

// WithMaxBackups keeps at most n rotated files (name.1 … name.n, the
// highest number the oldest); older ones are removed. n must be ≥ 1.
func WithMaxBackups(n int) Option { return optionFunc(func(c *config) { c.maxBackups = n }) }

// WithSyncEachUpload fsyncs the file after every line, trading throughput
// for durability. Stop always fsyncs.
func WithSyncEachUpload(on bool) Option { return optionFunc(func(c *config) { c.syncEach = on }) }

// WithFileMode sets the permission bits of files the client creates
// (default 0o644).
func WithFileMode(m fs.FileMode) Option { return optionFunc(func(c *config) { c.perm = m }) }

// Client appends OTLP JSON Lines to a file. It implements otlptrace.Client;
// wrap it with otlptrace.New (or use NewExporter). Safe for concurrent use.
type Client struct {
	path string
	cfg  config

	mu      sync.Mutex
	f       *os.File
	size    int64
	stopped bool
	rotated int // number of rotations performed (for tests and stats)
}

var _ otlptrace.Client = (*Client)(nil)

// NewClient returns a client writing to path. The file is opened (created
// or appended to) by Start. Options are validated here.
func NewClient(path string, opts ...Option) (*Client, error) {
	if path == "" {
		return nil, fmt.Errorf("%w: empty path", ErrBadOption)
	}
	cfg := config{maxBackups: DefaultMaxBackups, perm: 0o644}
	for _, o := range opts {
		if o != nil {
			o.apply(&cfg)
		}
	}
	if cfg.maxBytes < 0 {
		return nil, fmt.Errorf("%w: WithMaxBytes(%d) is negative", ErrBadOption, cfg.maxBytes)
	}
	if cfg.maxBackups < 1 {
		return nil, fmt.Errorf("%w: WithMaxBackups(%d) must be at least 1", ErrBadOption, cfg.maxBackups)
	}
	return &Client{path: path, cfg: cfg}, nil
}

// NewExporter is shorthand for NewClient followed by otlptrace.New.
func NewExporter(ctx context.Context, path string, opts ...Option) (*otlptrace.Exporter, error) {
	c, err := NewClient(path, opts...)
	if err != nil {
		return nil, err
	}
	return otlptrace.New(ctx, c)
}

// Path returns the path of the live file.
func (c *Client) Path() string { return c.path }

// Start opens the file for appending, creating it if needed.
func (c *Client) Start(ctx context.Context) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.stopped {
		return ErrStopped
	}
	if c.f != nil {
		return nil
	}
	return c.openLocked()
}

func (c *Client) openLocked() error {
	f, err := os.OpenFile(c.path, os.O_CREATE|os.O_WRONLY|os.O_APPEND, c.cfg.perm)
	if err != nil {
		return fmt.Errorf("otlpfile: open trace file: %w", err)
	}
	st, err := f.Stat()
	if err != nil {
		_ = f.Close()
		return fmt.Errorf("otlpfile: stat trace file: %w", err)
	}
	c.f, c.size = f, st.Size()
	return nil
}

// Stop fsyncs and closes the file. Later uploads fail with ErrStopped.
func (c *Client) Stop(ctx context.Context) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.stopped {
		return nil
	}
	c.stopped = true
	if c.f == nil {
		return nil
	}
	err := errors.Join(c.f.Sync(), c.f.Close())
	c.f = nil
	if err != nil {
		return fmt.Errorf("otlpfile: close trace file: %w", err)
	}
	return nil
}

var bufPool = sync.Pool{New: func() any { b := make([]byte, 0, 16<<10); return &b }}

// UploadTraces appends one line holding a TracesData object with spans.
// An empty batch writes nothing. Encoding runs outside the lock; the line
// is written with a single write call under it.
func (c *Client) UploadTraces(ctx context.Context, spans []*tracepb.ResourceSpans) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	if len(spans) == 0 {
		return nil
	}
	bp := bufPool.Get().(*[]byte)
	line := AppendLine((*bp)[:0], spans)
	defer func() {
		if cap(line) <= 4<<20 { // do not pin huge buffers
			*bp = line[:0]
			bufPool.Put(bp)
		}
	}()

	c.mu.Lock()
	defer c.mu.Unlock()
	if c.stopped {
		return ErrStopped
	}
	if c.f == nil {
		return ErrNotStarted
	}
	if c.cfg.maxBytes > 0 && c.size > 0 && c.size+int64(len(line)) > c.cfg.maxBytes {
		if err := c.rotateLocked(); err != nil {
			return err
		}
	}
	n, err := c.f.Write(line)
	c.size += int64(n)
	if err != nil {
		return fmt.Errorf("otlpfile: write trace file: %w", err)
	}
	if c.cfg.syncEach {
		if err := c.f.Sync(); err != nil {
			return fmt.Errorf("otlpfile: fsync trace file: %w", err)
		}
	}
	return nil
}

// backupName is the name of the i-th rotated file.
func (c *Client) backupName(i int) string { return c.path + "." + strconv.Itoa(i) }

// rotateLocked closes the live file, shifts name.i to name.(i+1) (dropping
// the oldest past maxBackups), renames name to name.1 and opens a fresh
// file. Cost O(maxBackups) renames.
func (c *Client) rotateLocked() error {
	if err := errors.Join(c.f.Sync(), c.f.Close()); err != nil {
		c.f = nil
		return fmt.Errorf("otlpfile: close before rotation: %w", err)
	}
	c.f = nil
	if err := os.Remove(c.backupName(c.cfg.maxBackups)); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("otlpfile: rotate: %w", err)
	}
	for i := c.cfg.maxBackups - 1; i >= 1; i-- {
		if err := os.Rename(c.backupName(i), c.backupName(i+1)); err != nil && !errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("otlpfile: rotate: %w", err)
		}
	}
	if err := os.Rename(c.path, c.backupName(1)); err != nil {
		return fmt.Errorf("otlpfile: rotate: %w", err)
	}
	c.rotated++
	return c.openLocked()
}
