package archive

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"testing"
)

// helperEnv makes the test binary an adder process (TestAdderProcess).
const helperEnv = "NULLBENCH_ARCHIVE_ADDER"

// adderCampaigns is what the adder process number p adds: the shared
// campaigns 0..shared-1 (process 0 forwards, process 1 backwards, so they
// collide all along) and own campaigns of its own.
func adderCampaigns(p, shared, own int) []*Campaign {
	var out []*Campaign
	for i := 0; i < shared; i++ {
		j := i
		if p == 1 {
			j = shared - 1 - i
		}
		out = append(out, sampleCampaign(j, fmt.Sprintf("S%02d", j), "bench-A", 2, 2))
		if i%3 == 0 && i/3 < own {
			k := 1000*(p+1) + i/3
			out = append(out, sampleCampaign(k, fmt.Sprintf("P%d-%02d", p, i/3), fmt.Sprintf("bench-%d", p), 2, 2))
		}
	}
	return out
}

const (
	sharedCampaigns = 24
	ownCampaigns    = 6
)

// TestAdderProcess is not a test on its own: TestTwoProcessesAddingAtOnce
// runs the test binary twice with NULLBENCH_ARCHIVE_ADDER=P:LOCATION, and
// each process adds its campaigns through its own connections.
func TestAdderProcess(t *testing.T) {
	spec := os.Getenv(helperEnv)
	if spec == "" {
		t.Skip("run as a subprocess by TestTwoProcessesAddingAtOnce")
	}
	p, loc, _ := strings.Cut(spec, ":")
	n, _ := strconv.Atoi(p)
	ctx := context.Background()
	s, err := Open(ctx, loc)
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	for _, c := range adderCampaigns(n, sharedCampaigns, ownCampaigns) {
		if _, _, err := s.Add(ctx, c); err != nil {
			t.Fatalf("process %d: %v", n, err)
		}
	}
}

// TestTwoProcessesAddingAtOnce starts two processes that add overlapping
// sets of campaigns to one new store at the same time (each also creates
// the schema): every campaign is there once with all its rows.
func TestTwoProcessesAddingAtOnce(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: starts two processes")
	}
	forEachBackend(t, func(t *testing.T, b backend) {
		loc := b.location(t)
		var wg sync.WaitGroup
		outs := make([][]byte, 2)
		errs := make([]error, 2)
		for p := 0; p < 2; p++ {
			wg.Add(1)
			go func(p int) {
				defer wg.Done()
				cmd := exec.Command(os.Args[0], "-test.run=^TestAdderProcess$", "-test.count=1")
				cmd.Env = append(os.Environ(), fmt.Sprintf("%s=%d:%s", helperEnv, p, loc))
				outs[p], errs[p] = cmd.CombinedOutput()
			}(p)
		}
		wg.Wait()
		for p := range errs {
			if errs[p] != nil {
				t.Fatalf("adder process %d: %v\n%s", p, errs[p], outs[p])
			}
		}
		checkAfterConcurrentAdds(t, openStore(t, loc))
	})
}

// TestTwoConnectionsAddingAtOnce does the same within one process, on two
// separately opened stores (two connection pools), many times over: the
// race detector watches the store's own code.
func TestTwoConnectionsAddingAtOnce(t *testing.T) {
	forEachBackend(t, func(t *testing.T, b backend) {
		loc := b.location(t)
		ctx := context.Background()
		var wg sync.WaitGroup
		errs := make([]error, 2)
		for p := 0; p < 2; p++ {
			wg.Add(1)
			go func(p int) {
				defer wg.Done()
				s, err := Open(ctx, loc)
				if err != nil {
					errs[p] = err
					return
				}
				defer s.Close()
				for _, c := range adderCampaigns(p, sharedCampaigns, ownCampaigns) {
					if _, _, err := s.Add(ctx, c); err != nil {
						errs[p] = err
						return
					}
				}
			}(p)
		}
		wg.Wait()
		for p, err := range errs {
			if err != nil {
				t.Fatalf("adder %d: %v", p, err)
			}
		}
		checkAfterConcurrentAdds(t, openStore(t, loc))
	})
}

func checkAfterConcurrentAdds(t *testing.T, s *Store) {
	t.Helper()
	want := map[string]*Campaign{}
	for p := 0; p < 2; p++ {
		for _, c := range adderCampaigns(p, sharedCampaigns, ownCampaigns) {
			want[c.JournalHash] = c
		}
	}
	if len(want) != sharedCampaigns+2*ownCampaigns {
		t.Fatalf("test set has %d campaigns", len(want))
	}
	list, err := s.List(context.Background(), Filter{})
	if err != nil {
		t.Fatal(err)
	}
	if len(list) != len(want) {
		t.Errorf("%d campaigns stored, want %d", len(list), len(want))
	}
	seen := map[string]bool{}
	for _, c := range list {
		w, ok := want[c.JournalHash]
		switch {
		case !ok:
			t.Errorf("campaign %d (%s) was never added", c.ID, c.Lot)
		case seen[c.JournalHash]:
			t.Errorf("campaign %s stored twice", c.Lot)
		case c.Results != len(w.Results) || c.Readings != len(w.Readings):
			t.Errorf("campaign %s: %d results and %d readings, want %d and %d", c.Lot, c.Results, c.Readings, len(w.Results), len(w.Readings))
		}
		seen[c.JournalHash] = true
	}
	var results, readings int
	for _, c := range want {
		results += len(c.Results)
		readings += len(c.Readings)
	}
	if n := count(t, s, "result"); n != results {
		t.Errorf("%d results stored, want %d", n, results)
	}
	if n := count(t, s, "reading"); n != readings {
		t.Errorf("%d readings stored, want %d", n, readings)
	}
	if n := count(t, s, "schema_version"); n != len(migrations) {
		t.Errorf("%d migrations recorded, want %d (one each)", n, len(migrations))
	}
}
