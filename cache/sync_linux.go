//go:build linux

package cache

import (
	"fmt"
	"os"

	"golang.org/x/sys/unix"
)

// Sync makes everything written to the cache so far durable with one
// syncfs(2) of the file system that holds it (objects and index lines are
// written without a per-object fsync; see writeAtomic). The runner calls
// it once per batch of nodes.
func (c *Cache) Sync() error {
	d, err := os.Open(c.dir)
	if err != nil {
		return fmt.Errorf("cache: %w", err)
	}
	defer d.Close()
	if err := unix.Syncfs(int(d.Fd())); err != nil {
		return fmt.Errorf("cache: syncfs %s: %w", c.dir, err)
	}
	return nil
}
