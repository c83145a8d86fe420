package stages

import (
	"bytes"
	"testing"

	"codeberg.org/sbinet/npyio/npy"
)

// EncodeCounts round-trips, its header is aligned to 64 bytes as the .npy
// format 1.0 requires, and an independent reader (the npyio library)
// reads the same shape, dtype and values.
func TestCountsFormat(t *testing.T) {
	for _, c := range []struct{ rows, cols int }{{1, 1}, {3, 14}, {64, 10}, {1000, 2}} {
		raw := make([]uint32, c.rows*c.cols)
		for i := range raw {
			raw[i] = uint32(i*2654435761) ^ 0xdeadbeef
		}
		b, err := EncodeCounts(raw, c.cols)
		if err != nil {
			t.Fatal(err)
		}
		hlen := int(b[8]) | int(b[9])<<8
		if (10+hlen)%64 != 0 || b[10+hlen-1] != '\n' {
			t.Errorf("%dx%d: header of %d bytes is not 64-aligned or not ended by a newline", c.rows, c.cols, hlen)
		}
		got, r, k, err := DecodeCounts(b)
		if err != nil || r != c.rows || k != c.cols {
			t.Fatalf("%dx%d: decoded %dx%d, %v", c.rows, c.cols, r, k, err)
		}
		for i := range raw {
			if got[i] != raw[i] {
				t.Fatalf("%dx%d: value %d is %d, want %d", c.rows, c.cols, i, got[i], raw[i])
			}
		}
		rd, err := npy.NewReader(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		if sh := rd.Header.Descr.Shape; len(sh) != 2 || sh[0] != c.rows || sh[1] != c.cols {
			t.Errorf("npyio reads shape %v", sh)
		}
		var lib []uint32
		if err := rd.Read(&lib); err != nil {
			t.Fatal(err)
		}
		for i := range raw {
			if lib[i] != raw[i] {
				t.Fatalf("npyio reads value %d as %d, want %d", i, lib[i], raw[i])
			}
		}
	}
	if _, err := EncodeCounts(make([]uint32, 5), 2); err == nil {
		t.Error("a partial row was encoded")
	}
	// a float64 array is refused with the header in the message
	f, _ := EncodeNpy([]float64{1, 2}, 1, 2)
	if _, _, _, err := DecodeCounts(f); err == nil {
		t.Error("a float64 array was read as counts")
	}
}

// FuzzDecodeCounts: no input makes the reader panic or return a shape
// that does not match its values.
func FuzzDecodeCounts(f *testing.F) {
	ok, _ := EncodeCounts([]uint32{1, 2, 3, 4, 5, 6}, 3)
	f.Add(ok)
	f.Add(ok[:20])
	f.Add([]byte("\x93NUMPY\x02\x00\xff\xff\xff\xff"))
	f.Fuzz(func(t *testing.T, b []byte) {
		raw, rows, cols, err := DecodeCounts(b)
		if err == nil && len(raw) != rows*cols {
			t.Fatalf("%d values for %dx%d", len(raw), rows, cols)
		}
	})
}

// A stored fixed-M shard of a 3D lattice (14 count columns) with blocks
// of 16 sweeps costs at most 4 bytes per sweep, its cache index line
// ("v1 <hex output> <size>\n") included: a 3D 16³ study at 100 000 sweeps
// per sector (2049 sectors) then stays under 0.8 GB of sample objects.
func TestCompactSampleBytes(t *testing.T) {
	const sweeps = 10000
	b, err := Sample(SampleParams{D: 3, L: 3, Beta: 0.2, Estimator: "insertion", M: 3, Sweeps: sweeps, Therm: 10, Block: 16, Seed: 1}).Run(nil)
	if err != nil {
		t.Fatal(err)
	}
	index := len("v1 ") + 64 + len(" 35072\n")
	perSweep := float64(len(b)+index) / sweeps
	total := perSweep * 2049 * 100000
	t.Logf("%.3f bytes per (sector × sweep); 3D 16³ at 100 000 sweeps: %.3g GB", perSweep, total/1e9)
	if perSweep > 4 || total > 0.8e9 {
		t.Errorf("%.3f bytes per sweep (%.3g GB for 3D 16³ at 100 000 sweeps), want ≤ 4 (< 0.8 GB)", perSweep, total/1e9)
	}
}
