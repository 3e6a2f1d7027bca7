package faulttest

import (
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	soakv1 "soakfarm/proto/soak/v1"
)

// The test's own private link: a /30 whose two addresses exist only on
// the veth pair the test makes.
const (
	hostAddr = "10.213.77.1"
	nsAddr   = "10.213.77.2"
)

// cutter cuts one worker off from NATS and heals the cut.
type cutter interface {
	// natsURL is the URL the cut-off worker dials.
	natsURL() string
	// prefix runs the worker inside the cut-off place.
	prefix() []string
	cut(t *testing.T)
	heal(t *testing.T)
	String() string
}

// netnsLink is a network namespace joined to the host by a veth pair;
// cutting takes the host end of the link down, so packets vanish without
// any reset, as when a cable is pulled.
type netnsLink struct {
	ns, hostIf, port string
}

func ipCmd(args ...string) error {
	out, err := exec.Command("ip", args...).CombinedOutput()
	if err != nil {
		return fmt.Errorf("ip %s: %w: %s", strings.Join(args, " "), err, strings.TrimSpace(string(out)))
	}
	return nil
}

// newNetnsLink makes the namespace and link, removed when the test ends
// whatever happens; an error if the environment does not allow it.
func newNetnsLink(t *testing.T) (*netnsLink, error) {
	id := os.Getpid() % 100000
	l := &netnsLink{ns: fmt.Sprintf("soakft%d", id), hostIf: fmt.Sprintf("sfth%d", id)}
	nsIf := fmt.Sprintf("sftn%d", id)
	t.Cleanup(func() {
		ipCmd("link", "del", l.hostIf)
		ipCmd("netns", "del", l.ns)
	})
	for _, args := range [][]string{
		{"netns", "add", l.ns},
		{"link", "add", l.hostIf, "type", "veth", "peer", "name", nsIf},
		{"link", "set", nsIf, "netns", l.ns},
		{"addr", "add", hostAddr + "/30", "dev", l.hostIf},
		{"link", "set", l.hostIf, "up"},
		{"netns", "exec", l.ns, "ip", "addr", "add", nsAddr + "/30", "dev", nsIf},
		{"netns", "exec", l.ns, "ip", "link", "set", nsIf, "up"},
	} {
		if err := ipCmd(args...); err != nil {
			return nil, err
		}
	}
	return l, nil
}

func (l *netnsLink) natsURL() string  { return "nats://" + net.JoinHostPort(hostAddr, l.port) }
func (l *netnsLink) prefix() []string { return []string{"ip", "netns", "exec", l.ns} }
func (l *netnsLink) cut(t *testing.T) {
	if err := ipCmd("link", "set", l.hostIf, "down"); err != nil {
		t.Fatal(err)
	}
}
func (l *netnsLink) heal(t *testing.T) {
	if err := ipCmd("link", "set", l.hostIf, "up"); err != nil {
		t.Fatal(err)
	}
}
func (l *netnsLink) String() string {
	return "network namespace " + l.ns + " with its veth link taken down"
}

// stallProxy relays TCP to NATS; cutting stops relaying bytes without
// closing anything, so the worker sees silence, not a reset.
type stallProxy struct {
	lis    net.Listener
	target string
	mu     sync.Mutex
	cond   *sync.Cond
	cutOff bool
}

func newStallProxy(t *testing.T, target string) *stallProxy {
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	p := &stallProxy{lis: lis, target: target}
	p.cond = sync.NewCond(&p.mu)
	t.Cleanup(func() { lis.Close() })
	go func() {
		for {
			c, err := lis.Accept()
			if err != nil {
				return
			}
			up, err := net.Dial("tcp", target)
			if err != nil {
				c.Close()
				continue
			}
			go p.relay(c, up)
			go p.relay(up, c)
		}
	}()
	return p
}

func (p *stallProxy) relay(from, to net.Conn) {
	defer from.Close()
	defer to.Close()
	buf := make([]byte, 32<<10)
	for {
		n, err := from.Read(buf)
		p.mu.Lock()
		for p.cutOff {
			p.cond.Wait()
		}
		p.mu.Unlock()
		if n > 0 {
			if _, werr := to.Write(buf[:n]); werr != nil {
				return
			}
		}
		if err != nil {
			return
		}
	}
}

func (p *stallProxy) natsURL() string  { return "nats://" + p.lis.Addr().String() }
func (p *stallProxy) prefix() []string { return nil }
func (p *stallProxy) cut(*testing.T) {
	p.mu.Lock()
	p.cutOff = true
	p.mu.Unlock()
}
func (p *stallProxy) heal(*testing.T) {
	p.mu.Lock()
	p.cutOff = false
	p.cond.Broadcast()
	p.mu.Unlock()
}
func (p *stallProxy) String() string { return "TCP relay in the test process that stops relaying" }

func TestWorkerCutOffFromNATSRejoins(t *testing.T) {
	t.Parallel()
	opts := farmOptions{ackWait: 2 * time.Second, maxAttempts: 3}
	link, err := newNetnsLink(t)
	if err == nil {
		// Non-loopback listening needs a NATS user.
		opts.natsHost, opts.natsUser, opts.natsPassword = hostAddr, "farm", "test-only-password"
	} else {
		t.Logf("no network namespace (%v); cutting through a relay instead", err)
	}
	f := newFarm(t, opts)
	var cutter cutter
	if link != nil {
		_, link.port, _ = net.SplitHostPort(strings.TrimPrefix(f.natsURL, "nats://"))
		cutter = link
	} else {
		cutter = newStallProxy(t, strings.TrimPrefix(f.natsURL, "nats://"))
	}
	t.Logf("cut-off worker runs behind a %s", cutter)
	ctx, cancel := context.WithTimeout(t.Context(), 90*time.Second)
	defer cancel()

	cutOff := f.startWorker("cut-off", cutter.prefix(), "--nats", cutter.natsURL())
	ids := f.submit(ctx, longJob("partition"))
	id := ids[0]
	w := f.watch(ctx, ids)
	cutOff.waitLog(t, startedLog, 20*time.Second)
	healthy := f.startWorker("healthy", nil)
	time.Sleep(time.Second)
	cutter.cut(t)
	cutAt := time.Now()
	taken, err := w.startedBy(ctx, id, "cut-off")
	if err != nil {
		t.Fatal(err)
	}
	redelivered := taken.GetTime().AsTime().Sub(cutAt)
	time.Sleep(3 * time.Second)
	cutter.heal(t)
	cutFor := time.Since(cutAt)
	w.waitFinals(t, ctx, 1)
	w.wait(t, ctx)
	tl := f.checkExactlyOnce(ctx, ids, w)
	atts := f.get(ctx, id).GetAttempts()
	if len(atts) != 2 || atts[0].GetWorker() != "cut-off" || !strings.Contains(atts[0].GetError(), lostWorker) || atts[1].GetWorker() != "healthy" {
		t.Errorf("attempts %v; want the cut-off worker's lost and the healthy one's finishing", atts)
	}
	cutOff.waitLog(t, discardLog, 30*time.Second)

	// The cut-off worker rejoins by itself: with the healthy one gone, it
	// takes the next job.
	healthy.signal(t, syscall.SIGINT)
	<-healthy.exited
	rejoinFrom := time.Now()
	next := f.submit(ctx, sphere("after-partition", 8, 300))
	wn := f.watch(ctx, next)
	wn.waitFinals(t, ctx, 1)
	job := f.get(ctx, next[0])
	if job.GetState() != soakv1.JobState_JOB_STATE_FINISHED || job.GetWorker() != "cut-off" {
		t.Errorf("job after the heal: %s by %s, want finished by the cut-off worker", job.GetState(), job.GetWorker())
	}
	if !cutOff.alive() {
		t.Error("the cut-off worker exited")
	}
	t.Logf("figures: jobs=%d faults=1 (worker cut off from NATS for %s: %s) finished=%d lost=%d duplicates=%d time-to-redeliver=%s (ack wait 2s) next-job-done-by-rejoined-worker-in=%s (from its submit)",
		tl.jobs+1, cutFor.Round(100*time.Millisecond), cutter, tl.finished, tl.lost, tl.duplicates, redelivered.Round(time.Millisecond), job.GetEndTime().AsTime().Sub(rejoinFrom).Round(time.Millisecond))
}
