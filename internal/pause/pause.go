// Package pause owns the one way the project waits between retries: a
// timer that gives way to a context's end.
package pause

import (
	"context"
	"time"
)

// For waits d, or until ctx ends, in which case it returns ctx's error.
func For(ctx context.Context, d time.Duration) error {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}
