package sampler

import (
	"fmt"
	"math"
	"testing"

	"strata/stages/lattice"
	"strata/stages/sampler/baseline"
)

func mustLat(tb testing.TB, d, l int) *lattice.Lattice {
	tb.Helper()
	x, err := lattice.New(d, l)
	if err != nil {
		tb.Fatal(err)
	}
	return x
}

// The fixed-sector chain keeps its magnetization and its histograms count
// every site once.
func TestSectorInvariants(t *testing.T) {
	for _, c := range []struct{ d, l, m int }{{1, 2, 0}, {1, 9, 3}, {2, 4, -6}, {3, 3, 1}} {
		lat := mustLat(t, c.d, c.l)
		out, err := Sector(Chain{Lat: lat, Beta: 0.3, M: c.m, Therm: 5, Sweeps: 20, Seed: 1})
		if err != nil {
			t.Fatal(err)
		}
		w := HistWidth(c.d)
		for s := 0; s < 20; s++ {
			up, dn := 0.0, 0.0
			for b := 0; b < w; b++ {
				up += out[s*2*w+b]
				dn += out[s*2*w+w+b]
			}
			if int(up-dn) != c.m || int(up+dn) != lat.N {
				t.Fatalf("d=%d L=%d: sweep %d has %v up and %v down spins, want M=%d", c.d, c.l, s, up, dn, c.m)
			}
		}
	}
}

func TestBadChains(t *testing.T) {
	lat := mustLat(t, 1, 6)
	for _, c := range []Chain{{Lat: lat, M: 5, Sweeps: 1}, {Lat: lat, M: 8, Sweeps: 1}, {Lat: lat, Beta: -1, Sweeps: 1}, {Lat: lat, Beta: math.NaN(), Sweeps: 1}} {
		if _, err := Sector(c); err == nil {
			t.Errorf("accepted %+v", c)
		}
	}
	if _, err := Pair(Chain{Lat: lat, M: -6, Sweeps: 1}); err == nil {
		t.Error("pair chain below −N accepted")
	}
}

// Determinism: same seed, same numbers; another seed, other numbers.
func TestSeeds(t *testing.T) {
	lat := mustLat(t, 2, 6)
	a, _ := Sector(Chain{Lat: lat, Beta: 0.3, M: 4, Sweeps: 50, Seed: 9})
	b, _ := Sector(Chain{Lat: lat, Beta: 0.3, M: 4, Sweeps: 50, Seed: 9})
	c, _ := Sector(Chain{Lat: lat, Beta: 0.3, M: 4, Sweeps: 50, Seed: 10})
	same, diff := true, false
	for i := range a {
		same = same && a[i] == b[i]
		diff = diff || a[i] != c[i]
	}
	if !same || !diff {
		t.Errorf("same seed equal: %v; other seed differs: %v", same, diff)
	}
}

func benchChain(b *testing.B, d, l int, pair bool) {
	lat := mustLat(b, d, l)
	sweeps := 20
	c := Chain{Lat: lat, Beta: 0.3, M: lat.N / 4 * 2, Sweeps: sweeps, Seed: 3}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c.Seed++
		if pair {
			Pair(c)
		} else {
			Sector(c)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*sweeps*lat.N), "ns/update")
}

// Benchmarks report ns per proposal, measurement included (one
// measurement per sweep of N proposals).
func BenchmarkSector(b *testing.B) {
	for _, c := range []struct{ d, l int }{{1, 4096}, {2, 64}, {3, 16}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) { benchChain(b, c.d, c.l, false) })
	}
}

func BenchmarkPair(b *testing.B) {
	for _, c := range []struct{ d, l int }{{1, 4096}, {2, 64}, {3, 16}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) { benchChain(b, c.d, c.l, true) })
	}
}

func BenchmarkPlainPair(b *testing.B) {
	lat := mustLat(b, 2, 64)
	sweeps := 20
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		baseline.Pair(lat, 0.3, lat.N/2, 0, sweeps, uint64(i))
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*sweeps*lat.N), "ns/update")
}
