package pipeline

import (
	"encoding/json"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"strata/cache"
)

// An output folder out/<name> is a symbolic link to a generation folder
// out/.<name>.gen<N> that holds one complete run's outputs. A run writes a
// new generation beside the current one and swaps the link with one
// rename, so readers only ever see a complete generation, however the run
// ends. The new generation starts as hard links to the current one's
// files, so unchanged files (samples, sidecars, figures) are not rewritten;
// files the previous manifest listed and this run did not produce (a
// branch no longer in the study) are dropped; files a user put there are
// kept. The previous generation is removed after the swap.
type generation struct {
	link     string // out/<name>
	dir      string // the new generation
	prev     string // the current generation ("" if none)
	prevOwns map[string]bool
}

func genPrefix(link string) string {
	return filepath.Join(filepath.Dir(link), "."+filepath.Base(link)+".gen")
}

// newGeneration prepares a new generation folder for link.
func newGeneration(link string) (*generation, error) {
	link = filepath.Clean(link)
	if err := os.MkdirAll(filepath.Dir(link), 0o777); err != nil {
		return nil, err
	}
	g := &generation{link: link}
	n := 0
	if fi, err := os.Lstat(link); err == nil {
		switch {
		case fi.Mode()&os.ModeSymlink != 0:
			target, err := os.Readlink(link)
			if err != nil {
				return nil, err
			}
			if !filepath.IsAbs(target) {
				target = filepath.Join(filepath.Dir(link), target)
			}
			if k, ok := genNumber(link, target); ok {
				n = k
			}
			if _, err := os.Stat(target); err == nil {
				g.prev = target // a link whose target is gone starts afresh
			}
		case fi.IsDir():
			// an output folder from before generations: it becomes generation 0
			g.prev = genPrefix(link) + "0"
			if err := os.Rename(link, g.prev); err != nil {
				return nil, err
			}
			if err := os.Symlink(filepath.Base(g.prev), link); err != nil {
				return nil, err
			}
		default:
			return nil, fmt.Errorf("%s exists and is not an output folder", link)
		}
	}
	g.prevOwns = map[string]bool{}
	if g.prev != "" {
		if b, err := os.ReadFile(filepath.Join(g.prev, "manifest.json")); err == nil {
			var m Manifest
			if json.Unmarshal(b, &m) == nil {
				for _, f := range m.Files {
					g.prevOwns[f] = true
				}
			}
		}
	}
	for k := n + 1; ; k++ { // unique even against a concurrent run
		g.dir = genPrefix(link) + strconv.Itoa(k)
		if err := os.Mkdir(g.dir, 0o777); err == nil {
			break
		} else if !os.IsExist(err) {
			return nil, err
		}
	}
	if g.prev != "" {
		if err := linkTree(g.prev, g.dir); err != nil {
			g.abandon()
			return nil, err
		}
	}
	return g, nil
}

// genNumber reports whether dir is one of link's generation folders and
// its number.
func genNumber(link, dir string) (int, bool) {
	prefix := genPrefix(link)
	if !strings.HasPrefix(dir, prefix) {
		return 0, false
	}
	k, err := strconv.Atoi(strings.TrimPrefix(dir, prefix))
	return k, err == nil
}

// linkTree hard-links every regular file of src into dst (copying where
// links fail), recreating folders.
func linkTree(src, dst string) error {
	return filepath.WalkDir(src, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, path)
		target := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(target, 0o777)
		}
		if !d.Type().IsRegular() {
			return nil
		}
		if err := os.Link(path, target); err != nil {
			data, rerr := os.ReadFile(path)
			if rerr != nil {
				return rerr
			}
			return os.WriteFile(target, data, 0o644)
		}
		return nil
	})
}

// finish drops the previous generation's files that this run did not
// produce, swaps the link to the new generation and removes the old one.
func (g *generation) finish(man Manifest) error {
	produced := map[string]bool{}
	for _, f := range man.Files {
		produced[f] = true
	}
	for f := range g.prevOwns {
		if !produced[f] {
			os.Remove(filepath.Join(g.dir, filepath.FromSlash(f)))
		}
	}
	removeEmptyDirs(g.dir)
	tmp := fmt.Sprintf("%s.link-%d", genPrefix(g.link), os.Getpid())
	os.Remove(tmp)
	if err := os.Symlink(filepath.Base(g.dir), tmp); err != nil {
		return err
	}
	if err := os.Rename(tmp, g.link); err != nil {
		os.Remove(tmp)
		return err
	}
	if _, ours := genNumber(g.link, g.prev); ours {
		os.RemoveAll(g.prev) // never a folder a user's own link pointed to
	}
	g.removeLeftovers()
	return nil
}

// abandon removes the unfinished new generation.
func (g *generation) abandon() {
	if g.dir != "" {
		os.RemoveAll(g.dir)
	}
}

// removeLeftovers removes generations that interrupted runs left, once
// they are older than the cache's age floor (a concurrent run's
// generation in progress is younger).
func (g *generation) removeLeftovers() {
	others, _ := filepath.Glob(genPrefix(g.link) + "*")
	for _, o := range others {
		if o == g.dir || strings.Contains(filepath.Base(o), ".link-") {
			continue
		}
		if fi, err := os.Stat(o); err == nil && time.Since(fi.ModTime()) > cache.AgeFloor {
			os.RemoveAll(o)
		}
	}
}

// removeEmptyDirs removes folders left empty under root (deepest first).
func removeEmptyDirs(root string) {
	var dirs []string
	filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err == nil && d.IsDir() && path != root {
			dirs = append(dirs, path)
		}
		return nil
	})
	for i := len(dirs) - 1; i >= 0; i-- {
		os.Remove(dirs[i]) // fails unless empty
	}
}
