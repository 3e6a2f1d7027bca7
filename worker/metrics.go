package worker

import (
	"errors"

	"github.com/prometheus/client_golang/prometheus"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// Metrics are the workers' Prometheus series. One Metrics serves every
// worker of a process, so the series add up over them.
type Metrics struct {
	running        prometheus.Gauge
	duration       *prometheus.HistogramVec
	cellsPerSecond prometheus.Histogram
	redeliveries   prometheus.Counter
	failedAttempts prometheus.Counter
}

// NewMetrics makes the series and registers them with reg; a nil reg
// leaves them unregistered.
func NewMetrics(reg prometheus.Registerer) (*Metrics, error) {
	m := &Metrics{
		running: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "soak_worker_jobs_running", Help: "Jobs this process's workers are computing.",
		}),
		duration: prometheus.NewHistogramVec(prometheus.HistogramOpts{
			Name: "soak_job_duration_seconds",
			Help: "Time from a job's first start to its end, by final state, for jobs a worker of this process ended.",
			// 1 s to about 9 h.
			Buckets: prometheus.ExponentialBuckets(1, 3, 11),
		}, []string{"state"}),
		cellsPerSecond: prometheus.NewHistogram(prometheus.HistogramOpts{
			Name: "soak_solver_cells_per_second",
			Help: "Part cells times time steps per wall-clock second of each finished job.",
			// 10^4 to 10^10 cell-steps per second.
			Buckets: prometheus.ExponentialBuckets(1e4, 10, 7),
		}),
		redeliveries: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "soak_redeliveries_total", Help: "Queue messages this process's workers received more than once.",
		}),
		failedAttempts: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "soak_failed_attempts_total", Help: "Attempts that ended in an error on this process's workers.",
		}),
	}
	if reg == nil {
		return m, nil
	}
	err := errors.Join(
		reg.Register(m.running), reg.Register(m.duration), reg.Register(m.cellsPerSecond),
		reg.Register(m.redeliveries), reg.Register(m.failedAttempts),
	)
	if err != nil {
		return nil, err
	}
	return m, nil
}

// ended records a job's duration from its first start to its end.
func (m *Metrics) ended(job *soakv1.Job) {
	if job.GetStartTime() == nil || job.GetEndTime() == nil {
		return // cancelled while queued
	}
	d := job.GetEndTime().AsTime().Sub(job.GetStartTime().AsTime())
	m.duration.WithLabelValues(store.StateWord(job.GetState())).Observe(d.Seconds())
}

// finished records a finished job's solver throughput.
func (m *Metrics) finished(s *soakv1.Summary) {
	if s.GetWallSeconds() > 0 && s.GetGrid().GetPartCells() > 0 {
		m.cellsPerSecond.Observe(float64(s.GetGrid().GetPartCells()) * float64(s.GetSteps()) / s.GetWallSeconds())
	}
}
