package localfarm_test

import (
	"context"
	"errors"
	"io"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"soakfarm/internal/localfarm"
	"soakfarm/pipeline"
	soakv1 "soakfarm/proto/soak/v1"
)

// TestMetricsScrape runs one job that fails its first attempt and finishes
// its second, serves the farm's registry over loopback HTTP, and looks for
// each series with the value the run must have left.
func TestMetricsScrape(t *testing.T) {
	t.Parallel()
	reg := prometheus.NewRegistry()
	attempts := 0
	runner := func(ctx context.Context, spec *soakv1.JobSpec, outDir string, opt pipeline.Options) (*soakv1.Summary, error) {
		attempts++
		if attempts == 1 {
			return nil, errors.New("first attempt fails on purpose")
		}
		if err := os.WriteFile(filepath.Join(outDir, "summary.json"), []byte(`{}`), 0o644); err != nil {
			return nil, err
		}
		// 1000 cells × 50 steps in 0.5 s: 10^5 cell-steps per second.
		return &soakv1.Summary{Grid: &soakv1.GridSummary{PartCells: 1000}, Steps: 50, WallSeconds: 0.5}, nil
	}
	farm, err := localfarm.Start(t.Context(), localfarm.Config{
		DataDir: t.TempDir(), Workers: 1, Runner: runner, Metrics: reg, Logger: quiet,
	})
	if err != nil {
		t.Fatal(err)
	}
	defer closeFarm(t, farm)
	c := client(t, farm)
	resp, err := c.SubmitJob(t.Context(), &soakv1.SubmitJobRequest{Spec: spec("metrics")})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(t.Context(), 30*time.Second)
	defer cancel()
	if err := waitEnd(ctx, c, resp.GetJob().GetId()); err != nil {
		t.Fatal(err)
	}

	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := &http.Server{Handler: promhttp.HandlerFor(reg, promhttp.HandlerOpts{})}
	go srv.Serve(lis)
	defer srv.Close()
	wants := []string{
		`soak_jobs{state="finished"} 1`,
		`soak_jobs{state="queued"} 0`,
		`soak_queue_depth 0`,
		`soak_queue_in_hand 0`,
		`soak_jobs_submitted_total 1`,
		`soak_job_duration_seconds_count{state="finished"} 1`,
		`soak_solver_cells_per_second_sum 100000`,
		`soak_redeliveries_total 1`,
		`soak_failed_attempts_total 1`,
		`soak_scheduler_nats_connected 1`,
	}
	// The worker acknowledges the queue message just after the job's final
	// event, which the watch may see first: scrape again for a while.
	var text string
	for range 50 {
		text = scrape(t, "http://"+lis.Addr().String()+"/metrics")
		if missing(text, wants) == nil {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	for _, want := range missing(text, wants) {
		t.Errorf("scrape lacks %q", want)
	}
	// The gauge drops only once the worker's handler returns, which may
	// be just after the watch saw the job end.
	if !strings.Contains(text, "\nsoak_worker_jobs_running ") {
		t.Error("scrape lacks soak_worker_jobs_running")
	}
	if t.Failed() {
		t.Logf("scrape:\n%s", text)
	}
}

func scrape(t *testing.T, url string) string {
	t.Helper()
	r, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Body.Close()
	body, err := io.ReadAll(r.Body)
	if err != nil {
		t.Fatal(err)
	}
	return string(body)
}

// missing lists the lines of wants that text lacks.
func missing(text string, wants []string) []string {
	var lacks []string
	for _, want := range wants {
		if !strings.Contains(text, want+"\n") {
			lacks = append(lacks, want)
		}
	}
	return lacks
}
