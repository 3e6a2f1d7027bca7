package cli

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/spf13/cobra"
	"github.com/spf13/pflag"
	"golang.org/x/term"

	"soakfarm/farmclient"
	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
	"soakfarm/scheduler/store"
)

// Environment variables of the farm client commands: the farm's address
// when --farm is not set, and the bearer token the farm may require (kept
// off the command line, where other users of the machine could read it).
const (
	farmEnv      = "SOAK_FARM"
	farmTokenEnv = "SOAK_FARM_TOKEN"
)

// defaultFarmAddr is where `soak serve` listens unless told otherwise.
const defaultFarmAddr = "127.0.0.1:7431"

// farmConn holds the flags every farm client command takes.
type farmConn struct {
	addr                   string
	plaintext              bool
	tlsCA, tlsCert, tlsKey string
	maxMessage             string
}

func (fc *farmConn) register(f *pflag.FlagSet) {
	f.StringVar(&fc.addr, "farm", "", "farm scheduler address host:port (default $"+farmEnv+", else "+defaultFarmAddr+")")
	f.BoolVar(&fc.plaintext, "plaintext", false, "talk to a farm beyond this machine without TLS (trusted network only)")
	f.StringVar(&fc.tlsCA, "tls-ca", "", "CA certificate (PEM) to check the farm's certificate with (default: the system's roots); implies TLS")
	f.StringVar(&fc.tlsCert, "tls-cert", "", "client certificate (PEM) to present to the farm")
	f.StringVar(&fc.tlsKey, "tls-key", "", "private key of --tls-cert (PEM)")
	f.StringVar(&fc.maxMessage, "max-message-bytes", "", "largest gRPC message either way, e.g. 128MiB (default 64MiB)")
}

// dial connects to the farm named by --farm, $SOAK_FARM or the default.
func (fc *farmConn) dial(ctx context.Context) (*farmclient.Client, error) {
	addr := fc.addr
	if addr == "" {
		addr = os.Getenv(farmEnv)
	}
	if addr == "" {
		addr = defaultFarmAddr
	}
	var opts []farmclient.Option
	tlsCfg, err := clientTLS(fc.tlsCA, fc.tlsCert, fc.tlsKey)
	if err != nil {
		return nil, withCode(ExitUsage, err)
	}
	switch {
	case tlsCfg != nil && fc.plaintext:
		return nil, withCode(ExitUsage, errors.New("--plaintext and --tls-ca/--tls-cert: choose one"))
	case tlsCfg != nil:
		opts = append(opts, farmclient.WithTLS(tlsCfg))
	case fc.plaintext:
		opts = append(opts, farmclient.WithPlaintext())
	}
	maxMessage, err := parseMessageBytes(fc.maxMessage)
	if err != nil {
		return nil, withCode(ExitUsage, err)
	}
	opts = append(opts, farmclient.WithMaxMessageBytes(maxMessage))
	if token := os.Getenv(farmTokenEnv); token != "" {
		opts = append(opts, farmclient.WithBearerToken(token))
	}
	c, err := farmclient.Dial(ctx, addr, opts...)
	if err != nil {
		return nil, withCode(ExitFailure, err)
	}
	return c, nil
}

func newSubmitCmd(s streams) *cobra.Command {
	var (
		conn  farmConn
		watch bool
		key   string
	)
	cmd := &cobra.Command{
		Use:   "submit SPEC...",
		Short: "Queue jobs on the farm",
		Long: "Checks each spec (YAML or JSON) here first, then queues them on the farm and prints one\n" +
			"line per job: its id and name. With --watch, follows the jobs to their end and exits with\n" +
			"0 when all finished, 1 when one failed, 3 when one was cancelled.",
		Args: cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ctx := cmd.Context()
			specs := make([]*soakv1.JobSpec, len(args))
			var problems []error
			for i, path := range args {
				spec, err := loadSpec(path, jobspec.DefaultLimits())
				if err != nil {
					problems = append(problems, err)
				}
				specs[i] = spec
			}
			if len(problems) > 0 {
				return withCode(ExitUsage, errors.Join(problems...))
			}
			c, err := conn.dial(ctx)
			if err != nil {
				return err
			}
			defer c.Close()
			jobs := make([]*soakv1.Job, len(specs))
			for i, spec := range specs {
				job, existing, err := c.Submit(ctx, spec, submitKey(key, i, len(specs)))
				if err != nil {
					return submitError(args[i], err)
				}
				note := ""
				if existing {
					note = "\t(submitted before with this key)"
				}
				fmt.Fprintf(s.out, "%s\t%s%s\n", job.GetId(), spec.GetName(), note)
				jobs[i] = job
			}
			if !watch {
				return nil
			}
			outcomes, err := followJobs(ctx, c, s.err, jobs)
			if err != nil {
				return err
			}
			return outcomeError(outcomes)
		},
	}
	f := cmd.Flags()
	conn.register(f)
	f.BoolVarP(&watch, "watch", "w", false, "follow the jobs' progress until they end")
	f.StringVar(&key, "key", "", "idempotency key: submitting again with it returns the same job\n(with several specs, the n-th gets KEY-n)")
	return cmd
}

// submitKey is the client key of the i-th of n specs.
func submitKey(key string, i, n int) string {
	if key == "" || n == 1 {
		return key
	}
	return key + "-" + strconv.Itoa(i+1)
}

// submitError turns a refused submit into a message naming each field the
// farm objected to, one per line.
func submitError(path string, err error) error {
	violations := farmclient.FieldViolations(err)
	if len(violations) == 0 {
		return withCode(ExitFailure, err)
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%s: the farm refused the spec:", path)
	for _, v := range violations {
		fmt.Fprintf(&b, "\n%s: %s", v.Field, v.Description)
	}
	return withCode(ExitUsage, errors.New(b.String()))
}

func newWatchCmd(s streams) *cobra.Command {
	var conn farmConn
	cmd := &cobra.Command{
		Use:   "watch JOB...",
		Short: "Follow farm jobs' progress until they end",
		Long:  "Shows a progress bar per job and a line per milestone; exits 0 when all finished, 1 when one\nfailed, 3 when one was cancelled.",
		Args:  cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ctx := cmd.Context()
			c, err := conn.dial(ctx)
			if err != nil {
				return err
			}
			defer c.Close()
			jobs := make([]*soakv1.Job, len(args))
			for i, id := range args {
				if jobs[i], err = c.Get(ctx, id); err != nil {
					return withCode(ExitFailure, err)
				}
			}
			outcomes, err := followJobs(ctx, c, s.err, jobs)
			if err != nil {
				return err
			}
			return outcomeError(outcomes)
		},
	}
	conn.register(cmd.Flags())
	return cmd
}

// jobStateNames maps the words --state accepts to states.
var jobStateNames = map[string]soakv1.JobState{
	"queued":    soakv1.JobState_JOB_STATE_QUEUED,
	"running":   soakv1.JobState_JOB_STATE_RUNNING,
	"finished":  soakv1.JobState_JOB_STATE_FINISHED,
	"failed":    soakv1.JobState_JOB_STATE_FAILED,
	"cancelled": soakv1.JobState_JOB_STATE_CANCELLED,
}

func newJobsCmd(s streams) *cobra.Command {
	var (
		conn   farmConn
		states []string
		limit  int
	)
	cmd := &cobra.Command{
		Use:   "jobs",
		Short: "List the farm's jobs, newest first",
		Args:  cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			ctx := cmd.Context()
			var want []soakv1.JobState
			for _, w := range states {
				st, ok := jobStateNames[strings.ToLower(strings.TrimSpace(w))]
				if !ok {
					return withCode(ExitUsage, fmt.Errorf("--state: want queued, running, finished, failed or cancelled, got %q", w))
				}
				want = append(want, st)
			}
			if limit < 1 {
				return withCode(ExitUsage, fmt.Errorf("--limit: must be at least 1, got %d", limit))
			}
			c, err := conn.dial(ctx)
			if err != nil {
				return err
			}
			defer c.Close()
			var jobs []*soakv1.Job
			token := ""
			for len(jobs) < limit {
				page, next, err := c.List(ctx, want, uint32(min(limit-len(jobs), 100)), token)
				if err != nil {
					return withCode(ExitFailure, err)
				}
				jobs = append(jobs, page...)
				if next == "" || len(page) == 0 {
					break
				}
				token = next
			}
			printJobTable(s.out, jobs[:min(len(jobs), limit)], time.Now())
			return nil
		},
	}
	f := cmd.Flags()
	conn.register(f)
	f.StringSliceVar(&states, "state", nil, "only jobs in these states: queued, running, finished, failed, cancelled (repeat or comma-separate)")
	f.IntVarP(&limit, "limit", "n", 20, "most jobs to list")
	return cmd
}

// printJobTable writes one row per job. Wall time is the time on the
// worker, still counting for a running job.
func printJobTable(w io.Writer, jobs []*soakv1.Job, now time.Time) {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tNAME\tSTATE\tSUBMITTED\tWORKER\tWALL")
	for _, j := range jobs {
		submitted, wall := "-", "-"
		if j.GetSubmitTime() != nil {
			submitted = j.GetSubmitTime().AsTime().Local().Format("2006-01-02 15:04:05")
		}
		if j.GetStartTime() != nil {
			end := now
			if j.GetEndTime() != nil {
				end = j.GetEndTime().AsTime()
			}
			wall = end.Sub(j.GetStartTime().AsTime()).Round(100 * time.Millisecond).String()
		}
		worker := j.GetWorker()
		if worker == "" {
			worker = "-"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\n", j.GetId(), j.GetSpec().GetName(), store.StateWord(j.GetState()), submitted, worker, wall)
	}
	tw.Flush()
}

func newCancelCmd(s streams) *cobra.Command {
	var (
		conn   farmConn
		reason string
	)
	cmd := &cobra.Command{
		Use:   "cancel JOB...",
		Short: "Stop farm jobs",
		Args:  cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ctx := cmd.Context()
			c, err := conn.dial(ctx)
			if err != nil {
				return err
			}
			defer c.Close()
			for _, id := range args {
				job, err := c.Cancel(ctx, id, reason)
				if err != nil {
					return withCode(ExitFailure, err)
				}
				fmt.Fprintf(s.out, "%s\t%s\t%s\n", job.GetId(), job.GetSpec().GetName(), store.StateWord(job.GetState()))
			}
			return nil
		},
	}
	f := cmd.Flags()
	conn.register(f)
	f.StringVar(&reason, "reason", "cancelled from the command line", "why, recorded with the job")
	return cmd
}

func newFetchCmd(s streams) *cobra.Command {
	var (
		conn   farmConn
		outDir string
	)
	cmd := &cobra.Command{
		Use:   "fetch JOB",
		Short: "Download a finished job's result files",
		Long:  "Writes the same files `soak run` does (probes.csv, summary.json, history.png, snapshots) into --out.",
		Args:  cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ctx := cmd.Context()
			c, err := conn.dial(ctx)
			if err != nil {
				return err
			}
			defer c.Close()
			if outDir == "" {
				outDir = args[0]
			}
			job, err := fetchJob(ctx, c, args[0], outDir)
			if err != nil {
				return err
			}
			printSummary(s.out, job.GetSummary(), outDir)
			return nil
		},
	}
	f := cmd.Flags()
	conn.register(f)
	f.StringVarP(&outDir, "out", "o", "", "folder for the result files (default ./JOB)")
	return cmd
}

// fetchJob downloads a job's files into dir and returns its record.
func fetchJob(ctx context.Context, c *farmclient.Client, id, dir string) (*soakv1.Job, error) {
	if _, err := c.Fetch(ctx, id, dir); err != nil {
		if errors.Is(err, farmclient.ErrNotFinished) {
			return nil, withCode(ExitUsage, err)
		}
		return nil, withCode(ExitFailure, err)
	}
	job, err := c.Get(ctx, id)
	if err != nil {
		return nil, withCode(ExitFailure, err)
	}
	return job, nil
}

// outcome is how a watched job ended.
type outcome struct {
	id, name string
	state    soakv1.JobState
	reason   string
	summary  *soakv1.Summary
}

// followJobs watches the jobs at once, drawing their progress on w, until
// each has ended. Interrupting it stops the watching, not the jobs.
func followJobs(ctx context.Context, c *farmclient.Client, w io.Writer, jobs []*soakv1.Job) ([]outcome, error) {
	b := newBoard(w)
	outcomes := make([]outcome, len(jobs))
	errs := make([]error, len(jobs))
	var wg sync.WaitGroup
	for i, job := range jobs {
		row := b.add(job.GetSpec().GetName(), job.GetSpec().GetEndS())
		wg.Go(func() {
			o := &outcomes[i]
			o.id, o.name = job.GetId(), job.GetSpec().GetName()
			errs[i] = c.Watch(ctx, job.GetId(), 0, func(ev *soakv1.JobEvent) error {
				recordEvent(o, ev)
				b.show(row, ev)
				return nil
			})
		})
	}
	wg.Wait()
	b.close()
	if err := errors.Join(errs...); err != nil {
		if ctx.Err() != nil {
			return outcomes, withCode(ExitCancelled, fmt.Errorf("stopped watching; the jobs go on on the farm: %w", ctx.Err()))
		}
		return outcomes, withCode(ExitFailure, err)
	}
	return outcomes, nil
}

func recordEvent(o *outcome, ev *soakv1.JobEvent) {
	switch k := ev.GetKind().(type) {
	case *soakv1.JobEvent_Finished:
		o.state, o.summary = soakv1.JobState_JOB_STATE_FINISHED, k.Finished.GetSummary()
	case *soakv1.JobEvent_Failed:
		o.state, o.reason = soakv1.JobState_JOB_STATE_FAILED, k.Failed.GetReason()
	case *soakv1.JobEvent_Cancelled:
		o.state, o.reason = soakv1.JobState_JOB_STATE_CANCELLED, k.Cancelled.GetReason()
	}
}

// outcomeError gives the exit code of a batch: 1 when a job failed, else 3
// when one was cancelled, else success.
func outcomeError(outcomes []outcome) error {
	code, lines := ExitOK, []string(nil)
	for _, o := range outcomes {
		switch o.state {
		case soakv1.JobState_JOB_STATE_FAILED:
			code = ExitFailure
			lines = append(lines, fmt.Sprintf("job %s (%s) failed: %s", o.id, o.name, o.reason))
		case soakv1.JobState_JOB_STATE_CANCELLED:
			if code == ExitOK {
				code = ExitCancelled
			}
			lines = append(lines, fmt.Sprintf("job %s (%s) was cancelled: %s", o.id, o.name, o.reason))
		}
	}
	if code == ExitOK {
		return nil
	}
	return withCode(code, errors.New(strings.Join(lines, "\n")))
}

// board draws a progress bar per job on a terminal, redrawing the block
// of bars in place; elsewhere (a log, a pipe) it writes a plain line each
// time a job passes another tenth of its simulated time. Event lines
// (start, milestone, end) go above the bars in both cases.
type board struct {
	mu  sync.Mutex
	w   io.Writer
	tty bool
	// width is the terminal's; a bar line longer than it would wrap and
	// throw off the redraw.
	width int
	rows  []*boardRow
	drawn int
}

type boardRow struct {
	name    string
	bar     *progressbar.ProgressBar
	tenths  int
	started bool
	done    bool
}

func newBoard(w io.Writer) *board {
	b := &board{w: w}
	if f, ok := w.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		b.tty = true
		b.width = 80
		if cols, _, err := term.GetSize(int(f.Fd())); err == nil && cols > 0 {
			b.width = cols
		}
	}
	return b
}

func (b *board) add(name string, endS float64) *boardRow {
	b.mu.Lock()
	defer b.mu.Unlock()
	// The board writes the bars itself, so each renders into a string
	// only, at every update.
	bar := progressbar.NewOptions64(int64(endS*1000),
		progressbar.OptionSetWriter(io.Discard),
		progressbar.OptionSetWidth(30),
		progressbar.OptionThrottle(0),
	)
	r := &boardRow{name: name, bar: bar}
	b.rows = append(b.rows, r)
	return r
}

func (b *board) show(r *boardRow, ev *soakv1.JobEvent) {
	b.mu.Lock()
	defer b.mu.Unlock()
	switch k := ev.GetKind().(type) {
	case *soakv1.JobEvent_Progress:
		r.started = true
		updateSimBar(r.bar, k.Progress)
		if b.tty {
			b.redraw()
			return
		}
		if end := k.Progress.GetEndS(); end > 0 && int(10*k.Progress.GetSimTimeS()/end) > r.tenths {
			r.tenths = int(10 * k.Progress.GetSimTimeS() / end)
			fmt.Fprintf(b.w, "%s %s\n", r.name, barText(r.bar))
		}
		return
	case *soakv1.JobEvent_Started:
		b.note(fmt.Sprintf("%s: started on %s (attempt %d)", r.name, k.Started.GetWorker(), k.Started.GetAttempt()))
	case *soakv1.JobEvent_Milestone:
		b.note(fmt.Sprintf("%s: milestone %s reached at %.1f s", r.name, k.Milestone.GetName(), k.Milestone.GetTimeS()))
	case *soakv1.JobEvent_Finished:
		r.done = true
		sum := k.Finished.GetSummary()
		b.note(fmt.Sprintf("%s: finished (%s at %.6g s)", r.name, sum.GetStopReason(), sum.GetEndTimeS()))
	case *soakv1.JobEvent_Failed:
		r.done = true
		b.note(fmt.Sprintf("%s: failed: %s", r.name, k.Failed.GetReason()))
	case *soakv1.JobEvent_Cancelled:
		r.done = true
		b.note(fmt.Sprintf("%s: cancelled: %s", r.name, k.Cancelled.GetReason()))
	}
}

// note writes a line above the bars.
func (b *board) note(line string) {
	b.erase()
	fmt.Fprintln(b.w, line)
	b.redraw()
}

// erase removes the drawn bars, leaving the cursor where they began.
func (b *board) erase() {
	if b.drawn > 0 {
		fmt.Fprintf(b.w, "\033[%dA\033[J", b.drawn)
		b.drawn = 0
	}
}

// redraw draws the bars of the jobs still running.
func (b *board) redraw() {
	if !b.tty {
		return
	}
	b.erase()
	for _, r := range b.rows {
		if r.done {
			continue
		}
		line := []rune(r.name + " waiting")
		if r.started {
			line = []rune(r.name + " " + barText(r.bar))
		}
		fmt.Fprintf(b.w, "\r%s\n", string(line[:min(len(line), b.width-1)]))
		b.drawn++
	}
}

// barText is a bar's last rendering without its carriage return.
func barText(bar *progressbar.ProgressBar) string {
	return strings.TrimSpace(bar.String())
}

func (b *board) close() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.erase()
}
