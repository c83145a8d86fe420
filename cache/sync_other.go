//go:build !linux

package cache

import (
	"fmt"
	"os"
	"path/filepath"
)

// Sync makes the cache's folders durable (fsync of each; without
// syncfs(2) the objects' data are left to the operating system). The
// runner calls it once per batch of nodes.
func (c *Cache) Sync() error {
	dirs, _ := filepath.Glob(filepath.Join(c.dir, "??"))
	for _, dir := range append(dirs, c.dir) {
		d, err := os.Open(dir)
		if err != nil {
			return fmt.Errorf("cache: %w", err)
		}
		_ = d.Sync()
		d.Close()
	}
	return nil
}
