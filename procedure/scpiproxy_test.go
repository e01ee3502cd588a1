package procedure

import (
	"bufio"
	"context"
	"io"
	"net"
	"strings"
	"sync"
	"testing"
	"time"

	"nullbench/instrument/sim"
	"nullbench/internal/simtest"
	"nullbench/procedure/plan"
)

// scpiProxy is a hostile instrument for the audit tests: a small TCP
// proxy on loopback in front of one of the simulated bench's instruments
// that rewrites chosen answers and can fail chosen set commands. The tool
// reaches it through its ordinary transport, session and profile-driven
// driver, exactly as it would reach a misbehaving instrument on a LAN.
//
// Program messages are line-based (IEEE 488.2 §7.5: one program message
// per terminator) and the session waits for each reply, so the proxy
// forwards one line at a time and reads exactly one reply line for a line
// that holds a query ('?').
type scpiProxy struct {
	upstream string // host:port of the simulated instrument
	ln       net.Listener

	mu    sync.Mutex
	armed bool
	// answer rewrites a query's reply while armed: ch is the channel the
	// last INST:NSEL selected ("" before any), reply the instrument's.
	answer func(ch, query, reply string) string
	// failSet decides, while armed, whether a program message without a
	// query fails: fail makes the next SYST:ERR? answer an execution
	// error (SCPI-99 vol. 2 §21.8: -222 data out of range); apply says
	// whether the command still reaches the instrument.
	failSet    func(ch, cmd string) (fail, apply bool)
	pendingErr bool
	fired      int      // answers rewritten or sets failed
	seen       []string // every line received, "ch|line"

	wg sync.WaitGroup
}

// startProxy listens on 127.0.0.1:0 in front of upstream
// ("tcp://127.0.0.1:N" or "127.0.0.1:N").
func startProxy(t *testing.T, upstream string) *scpiProxy {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	p := &scpiProxy{upstream: strings.TrimPrefix(upstream, "tcp://"), ln: ln}
	p.wg.Add(1)
	go p.serve()
	t.Cleanup(func() {
		ln.Close()
		p.wg.Wait()
	})
	return p
}

func (p *scpiProxy) address() string { return "tcp://" + p.ln.Addr().String() }

func (p *scpiProxy) arm(on bool) {
	p.mu.Lock()
	p.armed = on
	p.mu.Unlock()
}

func (p *scpiProxy) firedCount() int {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.fired
}

func (p *scpiProxy) serve() {
	defer p.wg.Done()
	var conns sync.WaitGroup
	defer conns.Wait()
	for {
		c, err := p.ln.Accept()
		if err != nil {
			return
		}
		conns.Add(1)
		go func() {
			defer conns.Done()
			p.handle(c)
		}()
	}
}

func (p *scpiProxy) handle(client net.Conn) {
	defer client.Close()
	inst, err := net.DialTimeout("tcp", p.upstream, 2*time.Second)
	if err != nil {
		return
	}
	defer inst.Close()
	cr, ir := bufio.NewReader(client), bufio.NewReader(inst)
	ch := ""
	for {
		line, err := cr.ReadString('\n')
		if err != nil {
			return
		}
		cmd := strings.TrimRight(line, "\r\n")
		upper := strings.ToUpper(cmd)
		if strings.HasPrefix(upper, "INST:NSEL ") || strings.HasPrefix(upper, "INSTRUMENT:NSELECT ") {
			ch = strings.TrimSpace(cmd[strings.IndexByte(cmd, ' ')+1:])
		}
		query := strings.Contains(cmd, "?")
		p.mu.Lock()
		p.seen = append(p.seen, ch+"|"+cmd)
		if query && upper == "SYST:ERR?" && p.pendingErr {
			p.pendingErr = false
			p.mu.Unlock()
			if _, err := io.WriteString(client, "-222,\"Data out of range\"\n"); err != nil {
				return
			}
			continue
		}
		forward := true
		if !query && p.armed && p.failSet != nil {
			if fail, apply := p.failSet(ch, cmd); fail {
				p.pendingErr, p.fired = true, p.fired+1
				forward = apply
			}
		}
		p.mu.Unlock()
		if forward {
			if _, err := io.WriteString(inst, line); err != nil {
				return
			}
		}
		if !query {
			continue
		}
		reply, err := ir.ReadString('\n')
		if err != nil {
			return
		}
		p.mu.Lock()
		if p.armed && p.answer != nil {
			body := strings.TrimRight(reply, "\r\n")
			if nb := p.answer(ch, cmd, body); nb != body {
				reply = nb + "\n"
				p.fired++
			}
		}
		p.mu.Unlock()
		if _, err := io.WriteString(client, reply); err != nil {
			return
		}
	}
}

// startHostileSim is startSim with scpiProxy instances in front of the
// named instruments ("psu", "dmm", ...): the plan's [bench] addresses
// point at the proxies. The run, the sim and the proxies share the sim's
// virtual clock for dwells and soaks; the proxies add no delay.
func startHostileSim(t *testing.T, commonMode string, names ...string) (*simSetup, map[string]*scpiProxy) {
	t.Helper()
	if testing.Short() {
		t.Skip("loopback run against the simulated bench")
	}
	mc := sim.NewManualClock()
	b, err := sim.New(sim.Config{Clock: mc})
	if err != nil {
		t.Fatal(err)
	}
	if err := b.Start(context.Background(), sim.ServeOptions{}); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	section := b.BenchSection()
	proxies := map[string]*scpiProxy{}
	for _, n := range names {
		var addr string
		for _, ep := range b.Endpoints() {
			if ep.Name == n {
				addr = ep.Address
			}
		}
		if addr == "" {
			t.Fatalf("no instrument %q on the simulated bench", n)
		}
		px := startProxy(t, addr)
		proxies[n] = px
		section = strings.Replace(section, `address = "`+addr+`"`, `address = "`+px.address()+`"`, 1)
	}
	rest := strings.ReplaceAll(simPlanRest, "%CM%", commonMode)
	rest = strings.ReplaceAll(strings.ReplaceAll(rest, "%MORE%", ""), "%TEMP%", "")
	p, err := plan.Parse([]byte(section+rest), "loopback.toml")
	if err != nil {
		t.Fatal(err)
	}
	clk := simtest.Clock{C: mc, T0: mc.Now()}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	rig, closeRig, err := OpenRig(ctx, p, RigOptions{Sleep: clk.Sleep, Timeout: 500 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { closeRig() })
	return &simSetup{bench: b, plan: p, rig: rig, clock: clk}, proxies
}
