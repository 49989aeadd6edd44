package cli

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// suggestCount is how many near names an unknown-entity error offers.
const suggestCount = 5

// unknownEntityHint says what to do about a name that is not in x: the near
// names (graphidx.Index.Suggest) and how to list names.
func unknownEntityHint(x *graphidx.Index, name string) string {
	var b strings.Builder
	prefix := name
	if near := x.Suggest(name, suggestCount); len(near) > 0 {
		fmt.Fprintf(&b, "; did you mean %s?", quoteList(near))
		prefix = near[0] // spelled as the index spells it
	}
	if i := strings.IndexAny(name, "/.-_:"); i > 0 {
		prefix = name[:i] // the first component: a useful listing
	} else if len(prefix) > 3 {
		prefix = prefix[:3]
	}
	fmt.Fprintf(&b, " (names are case-sensitive; list them with: hopwise inspect --index %s --list --prefix %s)", graphidx.EscapeControl(x.Path()), graphidx.EscapeControl(prefix))
	return b.String()
}

// quoteList formats names as "a", "b" or "c".
func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = fmt.Sprintf("%q", n)
	}
	if len(q) == 1 {
		return q[0]
	}
	return strings.Join(q[:len(q)-1], ", ") + " or " + q[len(q)-1]
}

// decideErrorHint adds to an error of router.Decide on x what the user can
// do about it: near names for an unknown entity, the entity's values for an
// unknown value, and what an expired deadline means. Other errors pass
// unchanged; the result still wraps err.
func decideErrorHint(x *graphidx.Index, q router.Query, timeout time.Duration, err error) error {
	switch {
	case errors.Is(err, router.ErrUnknownEntity):
		for _, name := range []string{q.From, q.To} {
			if _, ok := x.Lookup(name); !ok {
				return fmt.Errorf("%w%s", err, unknownEntityHint(x, name))
			}
		}
	case errors.Is(err, router.ErrUnknownValue):
		if id, ok := x.Lookup(q.From); ok {
			return fmt.Errorf("%w; %q has the values %s", err, q.From, quoteList(x.Values(id)))
		}
	case errors.Is(err, context.DeadlineExceeded):
		return fmt.Errorf("%w: the --timeout of %v expired before the router could estimate even the direct answer, "+
			"so there is no decision; a deadline that expires during the bridge search instead returns the best decision "+
			"found so far, marked truncated (cut: deadline). Raise --timeout, or set 0 for no deadline", err, timeout)
	}
	return err
}
