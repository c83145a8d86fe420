package cache

import (
	"crypto/rand"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"
)

// Leases tell gc which runs are alive, on a file system that several hosts
// share (where process IDs and flock mean nothing across nodes). A run
// holds a lease file in <cache>/leases: its host, pid and start time, its
// modification time refreshed every HeartbeatEvery. A lease whose file was
// not refreshed for LeaseStale is dead (its holder was killed or its node
// lost). gc never removes an entry, object or temp file newer than the
// oldest live lease's start.
const (
	HeartbeatEvery = 30 * time.Second
	LeaseStale     = 10 * time.Minute
	// AgeFloor: gc never removes anything younger than this, whatever
	// --older-than says (it can only be raised), so that in-flight work of
	// runs that hold no lease survives too.
	AgeFloor = 24 * time.Hour
)

// LeaseInfo is the content of a lease file.
type LeaseInfo struct {
	Host  string    `json:"host"`
	PID   int       `json:"pid"`
	Start time.Time `json:"start"`
}

// Lease is a held lease; Release it when the run ends.
type Lease struct {
	path string
	stop chan struct{}
	once sync.Once
}

func (c *Cache) leaseDir() string { return filepath.Join(c.dir, "leases") }

// Acquire writes a lease for this process and refreshes it every
// HeartbeatEvery until Release.
func (c *Cache) Acquire() (*Lease, error) {
	host, _ := os.Hostname()
	var rnd [6]byte
	_, _ = rand.Read(rnd[:])
	info := LeaseInfo{Host: host, PID: os.Getpid(), Start: c.now()}
	b, err := json.Marshal(info)
	if err != nil {
		return nil, err
	}
	name := fmt.Sprintf("%s-%d-%s.lease", strings.ReplaceAll(host, string(filepath.Separator), "_"), info.PID, hex.EncodeToString(rnd[:]))
	l := &Lease{path: filepath.Join(c.leaseDir(), name), stop: make(chan struct{})}
	if err := WriteFile(l.path, b, 0o644); err != nil {
		return nil, err
	}
	go func() {
		t := time.NewTicker(HeartbeatEvery)
		defer t.Stop()
		for {
			select {
			case <-t.C:
				now := time.Now()
				_ = os.Chtimes(l.path, now, now)
			case <-l.stop:
				return
			}
		}
	}()
	return l, nil
}

// Release ends the heartbeat and removes the lease file.
func (l *Lease) Release() {
	l.once.Do(func() {
		close(l.stop)
		os.Remove(l.path)
	})
}

// liveLeases returns the leases refreshed within LeaseStale of now; dead
// lease files older than AgeFloor are removed.
func (c *Cache) liveLeases(now time.Time) []LeaseInfo {
	var out []LeaseInfo
	files, _ := filepath.Glob(filepath.Join(c.leaseDir(), "*.lease"))
	for _, f := range files {
		st, err := os.Stat(f)
		if err != nil {
			continue
		}
		age := now.Sub(st.ModTime())
		if age > LeaseStale {
			if age > AgeFloor {
				os.Remove(f)
			}
			continue
		}
		var info LeaseInfo
		b, err := os.ReadFile(f)
		if err != nil || json.Unmarshal(b, &info) != nil {
			info.Start = st.ModTime().Add(-LeaseStale) // unreadable: assume it started as early as it can have
		}
		out = append(out, info)
	}
	return out
}
