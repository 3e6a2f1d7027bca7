package pause

import (
	"context"
	"errors"
	"testing"
	"time"
)

func TestFor(t *testing.T) {
	t.Parallel()
	start := time.Now()
	if err := For(context.Background(), 20*time.Millisecond); err != nil || time.Since(start) < 20*time.Millisecond {
		t.Errorf("waited %s with error %v, want 20ms and none", time.Since(start), err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	start = time.Now()
	if err := For(ctx, time.Hour); !errors.Is(err, context.Canceled) || time.Since(start) > time.Second {
		t.Errorf("cancelled wait took %s and returned %v", time.Since(start), err)
	}
}
