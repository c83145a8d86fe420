package sampler

import (
	"crypto/sha256"
	"encoding/binary"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// TestChainsGolden pins the exact output of short chains. The cache reuses
// samples by the sample stage's version, so a kernel change that alters any
// number must fail here, be accepted with -update, and bump sampleVersion
// in package stages; a pure speed-up must leave this file unchanged.
func TestChainsGolden(t *testing.T) {
	var b strings.Builder
	for _, c := range []struct{ d, l, m int }{{1, 2, 0}, {1, 11, 3}, {2, 4, 4}, {2, 6, 0}, {3, 3, -5}} {
		lat := mustLat(t, c.d, c.l)
		for _, beta := range []float64{0.1, 0.45} {
			ch := Chain{Lat: lat, Beta: beta, M: c.m, Therm: 7, Sweeps: 40, Seed: 99}
			sec, err := Sector(ch)
			if err != nil {
				t.Fatal(err)
			}
			ch.M = c.m + 2
			pair, err := Pair(ch)
			if err != nil {
				t.Fatal(err)
			}
			lanes, err := SectorLanes(Chain{Lat: lat, Beta: beta, M: c.m, Therm: 7, Sweeps: 40, Seed: 99}, 8)
			if err != nil {
				t.Fatal(err)
			}
			pairLanes, err := PairLanes(ch, 8)
			if err != nil {
				t.Fatal(err)
			}
			fmt.Fprintf(&b, "d=%d L=%d M=%d beta=%v sector %x pair %x lanes %x pair-lanes %x\n", c.d, c.l, c.m, beta,
				digest(sec), digest(pair), digestCounts(lanes), digestCounts(pairLanes))
		}
	}
	path := filepath.Join("testdata", "chains.golden")
	if *update {
		if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if b.String() != string(want) {
		t.Errorf("chain output changed (bump sampleVersion and run with -update if intended):\n got %s\nwant %s", b.String(), want)
	}
}

func digestCounts(x []uint32) []byte {
	h := sha256.New()
	binary.Write(h, binary.LittleEndian, x)
	return h.Sum(nil)[:8]
}

func digest(x []float64) []byte {
	h := sha256.New()
	for _, v := range x {
		binary.Write(h, binary.LittleEndian, math.Float64bits(v))
	}
	return h.Sum(nil)[:8]
}
