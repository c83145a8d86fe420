package cache

import (
	"errors"
	"os"
	"sync"
	"testing"
	"time"
)

func TestPutGet(t *testing.T) {
	c, err := Open(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	k := Sum([]byte("record"))
	if _, err := c.Get(k); !errors.Is(err, ErrMiss) {
		t.Fatalf("empty cache: %v", err)
	}
	if err := c.Put(k, []byte("hello")); err != nil {
		t.Fatal(err)
	}
	b, err := c.Get(k)
	if err != nil || string(b) != "hello" {
		t.Fatalf("got %q, %v", b, err)
	}
	if p, _ := ParseKey(k.String()); p != k {
		t.Error("key does not round-trip through hex")
	}
}

func TestCorruptionIsDetected(t *testing.T) {
	c, _ := Open(t.TempDir())
	k := Sum([]byte("r"))
	c.Put(k, []byte("payload"))
	p, _ := c.DataPath(k)
	os.Chmod(p, 0o644)
	os.WriteFile(p, []byte("paylaod"), 0o644)
	if _, err := c.Get(k); !errors.Is(err, ErrCorrupt) {
		t.Fatalf("damaged object: %v", err)
	}
	es, _ := c.List(true)
	if len(es) != 1 || es[0].Err == nil {
		t.Error("List(verify) missed the damage")
	}
	// a new Put repairs it
	if err := c.Put(k, []byte("payload")); err != nil {
		t.Fatal(err)
	}
	if b, err := c.Get(k); err != nil || string(b) != "payload" {
		t.Fatalf("after repair: %q %v", b, err)
	}
	// a damaged index is corrupt, not a crash
	os.WriteFile(c.path(k, "-a"), []byte("junk"), 0o644)
	if _, err := c.Get(k); !errors.Is(err, ErrCorrupt) {
		t.Fatalf("damaged index: %v", err)
	}
}

func TestGCKeepsReachedAndRecent(t *testing.T) {
	c, _ := Open(t.TempDir())
	now := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	c.SetClock(func() time.Time { return now })
	keep, old, recent := Sum([]byte("keep")), Sum([]byte("old")), Sum([]byte("recent"))
	for _, k := range []Key{keep, old, recent} {
		c.Put(k, []byte(k.String()))
	}
	past := now.Add(-40 * 24 * time.Hour)
	for _, k := range []Key{keep, old} {
		os.Chtimes(c.path(k, "-a"), past, past)
	}
	st, err := c.GC(map[Key]bool{keep: true}, 30*24*time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	if st.Actions != 1 || st.Outputs != 1 {
		t.Errorf("removed %+v, want 1 entry and 1 object", st)
	}
	if !c.Has(keep) || c.Has(old) || !c.Has(recent) {
		t.Errorf("after gc: keep %v old %v recent %v", c.Has(keep), c.Has(old), c.Has(recent))
	}
}

func TestConcurrentPut(t *testing.T) {
	c, _ := Open(t.TempDir())
	k := Sum([]byte("same"))
	var wg sync.WaitGroup
	for i := 0; i < 16; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			if err := c.Put(k, []byte("identical bytes")); err != nil {
				t.Error(err)
			}
		}()
	}
	wg.Wait()
	if b, err := c.Get(k); err != nil || string(b) != "identical bytes" {
		t.Fatalf("%q %v", b, err)
	}
}
