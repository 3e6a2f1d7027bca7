package scheduler

import (
	"context"
	"errors"
	"time"

	"github.com/nats-io/nats.go"
	"github.com/prometheus/client_golang/prometheus"

	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// metrics are the scheduler's Prometheus series. The counts of jobs by
// state (kept from a watch of the job records) and the queue depth (read
// at each scrape) come from JetStream, so every scheduler of a farm
// reports the same farm-wide numbers.
type metrics struct {
	submitted     prometheus.Counter
	givenUp       prometheus.Counter
	natsConnected prometheus.Gauge
}

func newMetrics() *metrics {
	return &metrics{
		submitted: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "soak_jobs_submitted_total", Help: "Jobs this scheduler queued.",
		}),
		givenUp: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "soak_jobs_given_up_total", Help: "Jobs this scheduler failed because every delivery's worker stopped responding.",
		}),
		natsConnected: prometheus.NewGauge(prometheus.GaugeOpts{
			Name: "soak_scheduler_nats_connected", Help: "1 while the scheduler's NATS connection is up, else 0.",
		}),
	}
}

func (m *metrics) register(reg prometheus.Registerer, st *store.Store, nc *nats.Conn, index *jobIndex) error {
	return errors.Join(
		reg.Register(m.submitted),
		reg.Register(m.givenUp),
		reg.Register(m.natsConnected),
		reg.Register(&farmCollector{store: st, nc: nc, index: index}),
	)
}

// scrapeTimeout bounds the JetStream reads of one scrape.
const scrapeTimeout = 5 * time.Second

var (
	jobsDesc = prometheus.NewDesc("soak_jobs", "Jobs on the farm by state.", []string{"state"}, nil)
	// queueDepthDesc counts jobs waiting for a worker; inHandDesc those
	// delivered to a worker and not yet acknowledged.
	queueDepthDesc = prometheus.NewDesc("soak_queue_depth", "Jobs in the queue not yet handed to a worker.", nil, nil)
	inHandDesc     = prometheus.NewDesc("soak_queue_in_hand", "Jobs handed to workers and not yet acknowledged.", nil, nil)
)

// farmCollector reads the farm-wide series at scrape time: the queue from
// its consumer, the jobs by state from the watch of the records (from the
// records themselves until the watch has caught up).
type farmCollector struct {
	store *store.Store
	nc    *nats.Conn
	index *jobIndex
}

func (c *farmCollector) Describe(ch chan<- *prometheus.Desc) {
	ch <- jobsDesc
	ch <- queueDepthDesc
	ch <- inHandDesc
}

func (c *farmCollector) Collect(ch chan<- prometheus.Metric) {
	if !c.nc.IsConnected() {
		return // no numbers rather than stale ones
	}
	ctx, cancel := context.WithTimeout(context.Background(), scrapeTimeout)
	defer cancel()
	if cons, err := c.store.QueueConsumer(ctx); err == nil {
		if info, err := cons.Info(ctx); err == nil {
			ch <- prometheus.MustNewConstMetric(queueDepthDesc, prometheus.GaugeValue, float64(info.NumPending))
			ch <- prometheus.MustNewConstMetric(inHandDesc, prometheus.GaugeValue, float64(info.NumAckPending))
		}
	}
	counts, ok := c.index.stateCounts(ctx, c.store)
	if !ok {
		var err error
		if counts, err = c.store.CountByState(ctx); err != nil {
			return
		}
	}
	for st := soakv1.JobState_JOB_STATE_QUEUED; st <= soakv1.JobState_JOB_STATE_CANCELLED; st++ {
		ch <- prometheus.MustNewConstMetric(jobsDesc, prometheus.GaugeValue, float64(counts[st]), store.StateWord(st))
	}
}
