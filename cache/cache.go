// Package cache is a content-addressed object store on the local file system.
//
// It knows only bytes and keys. An action key names a repeatable
// computation (the caller hashes a complete text record of everything that
// influences the output); the store maps it to an output, which is stored
// once under the blake3 hash of its bytes. Entries are written atomically
// (temp file in the same folder, rename; no per-object fsync — Sync makes a
// batch durable at once) and verified on every read: a damaged or missing
// object is reported as ErrCorrupt and is never returned, so callers treat
// it as a miss and recompute.
//
// Layout: DIR/xx/<hex action>-a holds one line "v1 <hex output> <size>";
// DIR/xx/<hex output>-d holds the output bytes; xx is the first key byte.
package cache

import (
	"encoding/hex"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/zeebo/blake3"
)

// Key is a 256-bit blake3 hash: of a text record (action keys) or of
// stored bytes (output IDs).
type Key [32]byte

// Sum returns the blake3 hash of b.
func Sum(b []byte) Key { return Key(blake3.Sum256(b)) }

// String returns the key as 64 lowercase hex digits.
func (k Key) String() string { return hex.EncodeToString(k[:]) }

// Short returns the first 12 hex digits, for logs.
func (k Key) Short() string { return k.String()[:12] }

// MarshalText encodes the key as hex (used by encoding/json).
func (k Key) MarshalText() ([]byte, error) { return []byte(k.String()), nil }

// UnmarshalText parses 64 hex digits.
func (k *Key) UnmarshalText(b []byte) error {
	p, err := ParseKey(string(b))
	if err != nil {
		return err
	}
	*k = p
	return nil
}

// ParseKey parses 64 hex digits.
func ParseKey(s string) (Key, error) {
	var k Key
	b, err := hex.DecodeString(s)
	if err != nil || len(b) != len(k) {
		return k, fmt.Errorf("cache: malformed key %q", s)
	}
	copy(k[:], b)
	return k, nil
}

var (
	// ErrMiss means no entry exists for the action key.
	ErrMiss = errors.New("cache: miss")
	// ErrCorrupt means an entry exists but its bytes do not match its
	// recorded hash or size, or its index line is unreadable.
	ErrCorrupt = errors.New("cache: corrupt object")
)

// Cache is a store rooted at one directory. It is safe for concurrent use
// by several goroutines and several processes.
type Cache struct {
	dir string
	// now is the clock used for last-use times; tests inject one.
	now func() time.Time
}

// Open returns the cache in dir, creating the directory if needed.
func Open(dir string) (*Cache, error) {
	if err := os.MkdirAll(dir, 0o777); err != nil {
		return nil, fmt.Errorf("cache: %w", err)
	}
	return &Cache{dir: dir, now: time.Now}, nil
}

// Dir returns the root directory.
func (c *Cache) Dir() string { return c.dir }

// SetClock replaces the clock used to stamp last use (for tests).
func (c *Cache) SetClock(now func() time.Time) { c.now = now }

func (c *Cache) path(k Key, suffix string) string {
	s := k.String()
	return filepath.Join(c.dir, s[:2], s+suffix)
}

// DataPath returns the file that holds the output stored for action, so
// that callers may hard-link it. The file must not be modified.
func (c *Cache) DataPath(action Key) (string, error) {
	out, _, err := c.index(action)
	if err != nil {
		return "", err
	}
	return c.path(out, "-d"), nil
}

// Put stores data as the output of action.
func (c *Cache) Put(action Key, data []byte) error {
	out := Sum(data)
	dp := c.path(out, "-d")
	if old, err := os.ReadFile(dp); err != nil || Sum(old) != out {
		if err := writeAtomic(dp, data); err != nil {
			return err
		}
	}
	line := fmt.Sprintf("v1 %s %d\n", out, len(data))
	return writeAtomic(c.path(action, "-a"), []byte(line))
}

// PutMeta stores provenance beside an entry (e.g. the CPU time it took):
// not hashed, not verified, removed with the entry.
func (c *Cache) PutMeta(action Key, meta []byte) error {
	return WriteFile(c.path(action, "-m"), meta, 0o644)
}

// Meta returns the provenance stored beside an entry.
func (c *Cache) Meta(action Key) ([]byte, error) {
	return os.ReadFile(c.path(action, "-m"))
}

// Listed reports whether an entry for action exists, without reading or
// verifying its object (for estimates; Get verifies).
func (c *Cache) Listed(action Key) bool {
	_, err := os.Stat(c.path(action, "-a"))
	return err == nil
}

func (c *Cache) index(action Key) (out Key, size int64, err error) {
	b, err := os.ReadFile(c.path(action, "-a"))
	if errors.Is(err, fs.ErrNotExist) {
		return out, 0, ErrMiss
	}
	if err != nil {
		return out, 0, fmt.Errorf("cache: %w", err)
	}
	f := strings.Fields(string(b))
	if len(f) != 3 || f[0] != "v1" {
		return out, 0, fmt.Errorf("%w: index %s unreadable", ErrCorrupt, action.Short())
	}
	if out, err = ParseKey(f[1]); err != nil {
		return out, 0, fmt.Errorf("%w: index %s: %v", ErrCorrupt, action.Short(), err)
	}
	if size, err = strconv.ParseInt(f[2], 10, 64); err != nil {
		return out, 0, fmt.Errorf("%w: index %s: bad size", ErrCorrupt, action.Short())
	}
	return out, size, nil
}

// Get returns the output stored for action. It returns ErrMiss when there
// is none and an error wrapping ErrCorrupt when the stored bytes fail
// verification; in both cases the caller should recompute and Put again.
func (c *Cache) Get(action Key) ([]byte, error) {
	out, size, err := c.index(action)
	if err != nil {
		return nil, err
	}
	dp := c.path(out, "-d")
	data, err := os.ReadFile(dp)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("%w: output of %s is missing", ErrCorrupt, action.Short())
	}
	if err != nil {
		return nil, fmt.Errorf("cache: %w", err)
	}
	if int64(len(data)) != size || Sum(data) != out {
		return nil, fmt.Errorf("%w: output of %s does not match its hash", ErrCorrupt, action.Short())
	}
	now := c.now()
	_ = os.Chtimes(c.path(action, "-a"), now, now) // last use, for trimming
	_ = os.Chtimes(dp, now, now)
	return data, nil
}

// Has reports whether action has a verified entry.
func (c *Cache) Has(action Key) bool {
	_, err := c.Get(action)
	return err == nil
}

// TempPrefix is the name prefix of the temp files a process writes before
// renaming them into place: the PID tells whose they are.
func TempPrefix(pid int) string { return fmt.Sprintf(".tmp-%d-", pid) }

// RemoveTemps removes the temp files that process pid left in the cache's
// folders (after an interrupted run: its own, never another writer's) and
// returns how many it removed.
func (c *Cache) RemoveTemps(pid int) int {
	n := 0
	dirs, _ := filepath.Glob(filepath.Join(c.dir, "??"))
	for _, d := range dirs {
		m, _ := filepath.Glob(filepath.Join(d, TempPrefix(pid)+"*"))
		for _, f := range m {
			if os.Remove(f) == nil {
				n++
			}
		}
	}
	return n
}

// writeAtomic writes a read-only cache file (temp file + rename) without
// fsync: every read re-hashes the object against its entry, so a torn or
// missing file after a crash is a miss and is recomputed, never used; the
// per-object fsync cost more than the work on small lattices.
func writeAtomic(path string, data []byte) error { return writeFile(path, data, 0o444, false) }

// WriteFile writes data to path atomically: a temp file in the same folder
// is written, synced, given perm and renamed over path, and the folder is
// synced. Readers see the old file or the new one, never a part.
func WriteFile(path string, data []byte, perm os.FileMode) error {
	return writeFile(path, data, perm, true)
}

func writeFile(path string, data []byte, perm os.FileMode, sync bool) error {
	dir := filepath.Dir(path)
	if err := os.MkdirAll(dir, 0o777); err != nil {
		return fmt.Errorf("cache: %w", err)
	}
	f, err := os.CreateTemp(dir, TempPrefix(os.Getpid())+"*")
	if err != nil {
		return fmt.Errorf("cache: %w", err)
	}
	tmp := f.Name()
	_, werr := f.Write(data)
	if werr == nil && sync {
		werr = f.Sync()
	}
	if cerr := f.Close(); werr == nil {
		werr = cerr
	}
	if werr == nil {
		werr = os.Chmod(tmp, perm)
	}
	if werr == nil {
		werr = os.Rename(tmp, path)
	}
	if werr != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, werr)
	}
	if !sync {
		return nil
	}
	if d, err := os.Open(dir); err == nil {
		_ = d.Sync()
		d.Close()
	}
	return nil
}

// Entry describes one stored action for listings.
type Entry struct {
	Action  Key
	Output  Key
	Size    int64
	LastUse time.Time
	Err     error // non-nil when the entry failed verification
}

// List returns every action entry, sorted by key. Verification of the
// bytes is done only when verify is true.
func (c *Cache) List(verify bool) ([]Entry, error) {
	var es []Entry
	err := c.walk(func(path string, k Key, suffix string, info fs.FileInfo) error {
		if suffix != "-a" {
			return nil
		}
		e := Entry{Action: k, LastUse: info.ModTime()}
		out, size, err := c.index(k)
		e.Output, e.Size, e.Err = out, size, err
		if err == nil && verify {
			data, rerr := os.ReadFile(c.path(out, "-d"))
			switch {
			case rerr != nil:
				e.Err = fmt.Errorf("%w: output missing", ErrCorrupt)
			case int64(len(data)) != size || Sum(data) != out:
				e.Err = fmt.Errorf("%w: output does not match its hash", ErrCorrupt)
			}
		}
		es = append(es, e)
		return nil
	})
	sort.Slice(es, func(i, j int) bool { return es[i].Action.String() < es[j].Action.String() })
	return es, err
}

func (c *Cache) walk(fn func(path string, k Key, suffix string, info fs.FileInfo) error) error {
	subs, err := os.ReadDir(c.dir)
	if err != nil {
		return fmt.Errorf("cache: %w", err)
	}
	for _, s := range subs {
		if !s.IsDir() || len(s.Name()) != 2 {
			continue
		}
		files, err := os.ReadDir(filepath.Join(c.dir, s.Name()))
		if err != nil {
			return fmt.Errorf("cache: %w", err)
		}
		for _, f := range files {
			name := f.Name()
			if len(name) != 66 || name[64] != '-' {
				continue
			}
			k, err := ParseKey(name[:64])
			if err != nil {
				continue
			}
			info, err := f.Info()
			if err != nil {
				continue
			}
			if err := fn(filepath.Join(c.dir, s.Name(), name), k, name[64:], info); err != nil {
				return err
			}
		}
	}
	return nil
}

// GCStats counts what GC removed.
type GCStats struct {
	Actions, Outputs int
	Bytes            int64
}

// GC removes every action entry not in keep whose last use is older than
// olderThan, then every object no remaining entry refers to and that is
// itself older than olderThan. olderThan is raised to AgeFloor if below.
// Nothing newer than the start of the oldest live lease is removed (a run
// in progress writes objects before their entries). Temp files are removed
// when older than the floor, or when no live lease names their process and
// they are older than LeaseStale; never a live writer's.
func (c *Cache) GC(keep map[Key]bool, olderThan time.Duration) (GCStats, error) {
	var st GCStats
	now := c.now()
	olderThan = max(olderThan, AgeFloor)
	leases := c.liveLeases(now)
	protectFrom := now.Add(time.Hour) // nothing is protected
	livePIDs := map[int]bool{}
	for _, l := range leases {
		if l.Start.Before(protectFrom) {
			protectFrom = l.Start
		}
		livePIDs[l.PID] = true
	}
	removable := func(info fs.FileInfo) bool {
		t := info.ModTime()
		return now.Sub(t) >= olderThan && t.Before(protectFrom)
	}
	live := map[Key]bool{}
	err := c.walk(func(path string, k Key, suffix string, info fs.FileInfo) error {
		if suffix != "-a" {
			return nil
		}
		if !keep[k] && removable(info) {
			if err := os.Remove(path); err == nil {
				st.Actions++
				os.Remove(c.path(k, "-m"))
			}
			return nil
		}
		if out, _, err := c.index(k); err == nil {
			live[out] = true
		}
		return nil
	})
	if err != nil {
		return st, err
	}
	err = c.walk(func(path string, k Key, suffix string, info fs.FileInfo) error {
		if suffix == "-d" && !live[k] && removable(info) {
			if err := os.Remove(path); err == nil {
				st.Outputs++
				st.Bytes += info.Size()
			}
		}
		return nil
	})
	// temp files left by killed writers
	matches, _ := filepath.Glob(filepath.Join(c.dir, "??", ".tmp-*"))
	for _, m := range matches {
		info, err := os.Stat(m)
		if err != nil || !info.ModTime().Before(protectFrom) {
			continue
		}
		age := now.Sub(info.ModTime())
		pid := tempPID(filepath.Base(m))
		if age >= olderThan || (!livePIDs[pid] && age >= LeaseStale) {
			os.Remove(m)
		}
	}
	return st, err
}

// tempPID reads the writer's pid from a temp file name (0 if none).
func tempPID(name string) int {
	var pid int
	if _, err := fmt.Sscanf(strings.TrimPrefix(name, ".tmp-"), "%d-", &pid); err != nil {
		return 0
	}
	return pid
}
