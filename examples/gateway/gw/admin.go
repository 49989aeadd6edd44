package gw

import (
	"crypto/subtle"
	"fmt"
	"net"
	"net/http"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/hopwise/hopwise/graphidx"
)

// admin guards an /admin/ route. With a token: the bearer token must match
// (constant-time), failed attempts are logged and, past 5 a minute from
// one address, refused with 429 before any comparison. Without a token:
// open only when the server was told it listens on loopback and the caller
// is on loopback; 403 otherwise.
func (s *Server) admin(h http.HandlerFunc) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		host := remoteHost(r)
		if s.cfg.AdminToken == "" {
			if !s.cfg.AdminOpenOnLoopback || !isLoopback(host) {
				writeError(w, http.StatusForbidden, "admin_disabled", "admin routes are disabled: no admin token is set and the gateway does not listen on loopback only")
				return
			}
			h(w, r)
			return
		}
		if wait, blocked := s.authFail.blocked(host); blocked {
			w.Header().Set("Retry-After", strconv.Itoa(int(wait.Seconds()+0.999)))
			writeError(w, http.StatusTooManyRequests, "too_many_attempts", "too many failed admin logins; retry later")
			return
		}
		got, ok := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
		if !ok || subtle.ConstantTimeCompare([]byte(got), []byte(s.cfg.AdminToken)) != 1 {
			n, logIt := s.authFail.fail(host)
			if logIt {
				s.log.Printf("gateway: failed admin login from %s on %s (%d in the last minute)", host, r.URL.Path, n)
			}
			writeError(w, http.StatusUnauthorized, "unauthorized", "admin routes need Authorization: Bearer <token>")
			return
		}
		h(w, r)
	}
}

func remoteHost(r *http.Request) string {
	host, _, err := net.SplitHostPort(r.RemoteAddr)
	if err != nil {
		return r.RemoteAddr
	}
	return host
}

func isLoopback(host string) bool {
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// IsLoopbackAddr reports whether a listener address (host:port) is on a
// loopback interface only.
func IsLoopbackAddr(addr net.Addr) bool {
	host, _, err := net.SplitHostPort(addr.String())
	return err == nil && isLoopback(host)
}

// failLimiter counts failed logins per address in fixed windows. It keeps
// at most maxFailHosts addresses; past that, the oldest window is dropped
// whole (an attacker spraying addresses resets only itself).
type failLimiter struct {
	mu     sync.Mutex
	limit  int
	window time.Duration
	hosts  map[string]*failWindow
	now    func() time.Time
}

type failWindow struct {
	start  time.Time
	n      int
	logged int
}

const maxFailHosts = 10_000

func newFailLimiter(limit int, window time.Duration) *failLimiter {
	return &failLimiter{limit: limit, window: window, hosts: map[string]*failWindow{}, now: time.Now}
}

func (l *failLimiter) get(host string) *failWindow {
	now := l.now()
	fw := l.hosts[host]
	if fw == nil || now.Sub(fw.start) >= l.window {
		if fw == nil && len(l.hosts) >= maxFailHosts {
			for h, o := range l.hosts {
				if now.Sub(o.start) >= l.window {
					delete(l.hosts, h)
				}
			}
			if len(l.hosts) >= maxFailHosts {
				clear(l.hosts)
			}
		}
		fw = &failWindow{start: now}
		l.hosts[host] = fw
	}
	return fw
}

// blocked reports whether host has used up its failures in this window,
// and how long until the window ends.
func (l *failLimiter) blocked(host string) (time.Duration, bool) {
	l.mu.Lock()
	defer l.mu.Unlock()
	fw := l.get(host)
	if fw.n >= l.limit {
		return l.window - l.now().Sub(fw.start), true
	}
	return 0, false
}

// fail counts one failure; it says whether to log it (the first few of a
// window, so a flood does not flood the log too).
func (l *failLimiter) fail(host string) (int, bool) {
	l.mu.Lock()
	defer l.mu.Unlock()
	fw := l.get(host)
	fw.n++
	if fw.logged < l.limit {
		fw.logged++
		return fw.n, true
	}
	return fw.n, false
}

func (s *Server) handleHealth(w http.ResponseWriter, _ *http.Request) {
	g := s.rt.Generation()
	status, code := "ok", http.StatusOK
	if g == 0 {
		status, code = "closed", http.StatusServiceUnavailable
	}
	writeJSON(w, code, map[string]any{
		"status": status, "generation": fmt.Sprintf("%016x", g), "reloads": s.reloads.Load(),
		"uptime_seconds": time.Since(s.started).Seconds(), "routing": !s.cfg.RoutingOff,
	})
}

func (s *Server) handleReload(w http.ResponseWriter, r *http.Request) {
	prev, cur, err := s.Reload()
	if err != nil {
		code, msg := "reload_failed", "the index could not be reopened; see the gateway log"
		if graphidx.IsCorruption(err) {
			code, msg = "index_corrupt", "the index file is damaged; the previous index stays in service"
		}
		s.log.Printf("gateway: reload: %v", err)
		writeError(w, http.StatusInternalServerError, code, msg)
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{
		"status": "reloaded", "generation": fmt.Sprintf("%016x", cur), "previous_generation": fmt.Sprintf("%016x", prev),
	})
}
