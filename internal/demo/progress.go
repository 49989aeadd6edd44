package demo

import (
	"fmt"
	"io"
	"os"
	"sync"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/mattn/go-isatty"
	"github.com/schollz/progressbar/v3"
)

// IsTerminal reports whether w is a terminal (a character device), so
// callers can choose between a redrawn progress bar and plain lines.
func IsTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	return isatty.IsTerminal(f.Fd()) || isatty.IsCygwinTerminal(f.Fd())
}

// BuildProgress turns graphidx build progress events into output on w: a
// progress bar over the corpus bytes when w is a terminal, otherwise one plain
// line per phase change and at most one per second while reading. total is
// the corpus size in bytes (≤ 0 when unknown: the bar then counts contexts).
//
// Use Event as the graphidx.WithProgress callback and call Finish once the
// build returns. A nil *BuildProgress ignores every call. Safe for
// concurrent use.
type BuildProgress struct {
	mu    sync.Mutex
	w     io.Writer
	bar   *progressbar.ProgressBar
	total int64
	phase string
	last  time.Time
}

// NewBuildProgress returns a progress reporter writing to w, or nil when w is
// nil.
func NewBuildProgress(w io.Writer, total int64) *BuildProgress {
	if w == nil {
		return nil
	}
	p := &BuildProgress{w: w, total: total}
	if IsTerminal(w) {
		max := total
		if max <= 0 {
			max = -1 // spinner
		}
		p.bar = progressbar.NewOptions64(max,
			progressbar.OptionSetWriter(w),
			progressbar.OptionSetDescription("indexing"),
			progressbar.OptionShowBytes(total > 0),
			progressbar.OptionSetWidth(30),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionShowElapsedTimeOnFinish(),
			progressbar.OptionOnCompletion(func() { fmt.Fprintln(w) }),
		)
	}
	return p
}

// Event is the graphidx.WithProgress callback.
func (p *BuildProgress) Event(ev graphidx.ProgressEvent) {
	if p == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	changed := ev.Phase != p.phase
	p.phase = ev.Phase
	if p.bar != nil {
		if changed {
			p.bar.Describe("indexing: " + ev.Phase)
		}
		if ev.BytesRead >= 0 && p.total > 0 {
			_ = p.bar.Set64(min(ev.BytesRead, p.total))
		} else if p.total <= 0 {
			_ = p.bar.Set64(int64(ev.Contexts))
		}
		return
	}
	now := time.Now()
	if !changed && now.Sub(p.last) < time.Second {
		return
	}
	p.last = now
	line := fmt.Sprintf("index build: %-5s %9d contexts, %5d entities", ev.Phase, ev.Contexts, ev.Entities)
	if ev.BytesRead >= 0 && p.total > 0 {
		line += fmt.Sprintf(", %5.1f%% of the corpus", 100*float64(min(ev.BytesRead, p.total))/float64(p.total))
	}
	if ev.Pairs > 0 {
		line += fmt.Sprintf(", %d pairs", ev.Pairs)
	}
	line += fmt.Sprintf(" (%.1fs)", ev.Elapsed.Seconds())
	fmt.Fprintln(p.w, line)
}

// Finish completes the bar (or does nothing for plain lines).
func (p *BuildProgress) Finish() {
	if p == nil || p.bar == nil {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.total > 0 {
		_ = p.bar.Set64(p.total)
	}
	_ = p.bar.Finish()
}
