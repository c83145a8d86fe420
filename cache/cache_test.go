package cache

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
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
	for _, k := range []Key{keep, old, recent} {
		out, _, _ := c.index(k)
		os.Chtimes(c.path(out, "-d"), past, past) // objects as old as their entries
	}
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

// gc never removes what is younger than the age floor, whatever
// --older-than says: an object written before its entry (a run in
// progress) survives a gc that names another study.
func TestGCAgeFloor(t *testing.T) {
	c, _ := Open(t.TempDir())
	k := Sum([]byte("in flight"))
	data := []byte("object written, entry not yet")
	if err := writeAtomic(c.path(Sum(data), "-d"), data); err != nil {
		t.Fatal(err)
	}
	st, _ := c.GC(nil, 0)
	if st.Outputs != 0 {
		t.Fatalf("gc removed a fresh unreferenced object: %+v", st)
	}
	// the entry lands after the gc: the object is still there
	line := fmt.Sprintf("v1 %s %d\n", Sum(data), len(data))
	writeAtomic(c.path(k, "-a"), []byte(line))
	if b, err := c.Get(k); err != nil || string(b) != string(data) {
		t.Fatalf("after gc: %q %v", b, err)
	}
	// past the floor it goes
	c.SetClock(func() time.Time { return time.Now().Add(AgeFloor + time.Hour) })
	os.Remove(c.path(k, "-a"))
	if st, _ := c.GC(nil, 0); st.Outputs != 1 {
		t.Errorf("an unreferenced object older than the floor stayed: %+v", st)
	}
}

// A live lease protects everything newer than its start, even past the
// floor (a run longer than a day); a dead lease (no heartbeat for
// LeaseStale) protects nothing. Temp files of a live writer stay.
func TestGCRespectsLiveLeases(t *testing.T) {
	c, _ := Open(t.TempDir())
	start := time.Now().Add(-3 * 24 * time.Hour)
	c.SetClock(func() time.Time { return start })
	l, err := c.Acquire()
	if err != nil {
		t.Fatal(err)
	}
	defer l.Release()
	now := time.Now()
	c.SetClock(func() time.Time { return now })
	os.Chtimes(l.path, now, now) // heartbeat
	k := Sum([]byte("written by the long run"))
	c.Put(k, []byte("two days old"))
	two := now.Add(-2 * 24 * time.Hour)
	out, _, _ := c.index(k)
	os.Chtimes(c.path(k, "-a"), two, two)
	os.Chtimes(c.path(out, "-d"), two, two)
	temp := filepath.Join(c.dir, out.String()[:2], TempPrefix(os.Getpid())+"x")
	os.WriteFile(temp, nil, 0o644)
	os.Chtimes(temp, two, two)
	if st, _ := c.GC(nil, 0); st.Actions+st.Outputs != 0 || !c.Has(k) {
		t.Fatalf("gc removed a live run's objects: %+v", st)
	}
	if _, err := os.Stat(temp); err != nil {
		t.Error("gc removed a live writer's temp file")
	}
	stale := now.Add(-LeaseStale - time.Minute)
	os.Chtimes(l.path, stale, stale)      // the holder died
	os.Chtimes(c.path(k, "-a"), two, two) // Has counted as a use
	os.Chtimes(c.path(out, "-d"), two, two)
	if st, _ := c.GC(nil, 0); st.Actions != 1 || st.Outputs != 1 {
		t.Errorf("a dead lease still protects: %+v", st)
	}
	if _, err := os.Stat(temp); err == nil {
		t.Error("the dead writer's temp file stayed")
	}
}

// Sync succeeds on a cache with objects in it (one syncfs per batch on
// Linux) and changes nothing that a read sees.
func TestSync(t *testing.T) {
	c, err := Open(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	k := Sum([]byte("action"))
	if err := c.Put(k, []byte("output")); err != nil {
		t.Fatal(err)
	}
	if err := c.Sync(); err != nil {
		t.Fatal(err)
	}
	if b, err := c.Get(k); err != nil || string(b) != "output" {
		t.Fatalf("after Sync: %q, %v", b, err)
	}
}
