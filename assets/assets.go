// Package assets embeds the static files (our stylesheet and script, vendored
// htmx and ECharts) and serves them under content-hashed URLs, so browsers may
// cache them for a year and a new release is fetched at once.
package assets

import (
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"io/fs"
	"net/http"
	"path"
	"strings"
	"sync"
)

//go:embed css js vendor
var files embed.FS

// Prefix is where the assets are mounted.
const Prefix = "/assets/"

var (
	once   sync.Once
	hashes map[string]string // file path -> short content hash
)

func load() {
	hashes = map[string]string{}
	_ = fs.WalkDir(files, ".", func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		b, err := files.ReadFile(p)
		if err != nil {
			return err
		}
		sum := sha256.Sum256(b)
		hashes[p] = hex.EncodeToString(sum[:5])
		return nil
	})
}

// URL is the cache-busting address of an embedded file, e.g.
// URL("css/app.css") = "/assets/3fa2c19b0d/css/app.css". An unknown name panics:
// it is a programming error caught by the first render in tests.
func URL(name string) string {
	once.Do(load)
	h, ok := hashes[name]
	if !ok {
		panic("assets: no file " + name)
	}
	return Prefix + h + "/" + name
}

// Dir is the hashed folder URL of a file's folder, with a trailing slash: what
// the chart library wants as its assets host.
func Dir(name string) string {
	u := URL(name)
	return u[:strings.LastIndex(u, "/")+1]
}

// Handler serves /assets/<hash>/<path>. A matching hash is cached for a year; a
// stale hash still gets the current file but is not cached, so a page rendered
// by an older instance during a rolling update keeps working.
func Handler() http.Handler {
	once.Do(load)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		rest := strings.TrimPrefix(r.URL.Path, Prefix)
		hash, name, ok := strings.Cut(rest, "/")
		name = path.Clean(name)
		cur, known := hashes[name]
		if !ok || !known {
			http.NotFound(w, r)
			return
		}
		if hash == cur {
			w.Header().Set("Cache-Control", "public, max-age=31536000, immutable")
		} else {
			w.Header().Set("Cache-Control", "no-cache")
		}
		http.ServeFileFS(w, r, files, name)
	})
}
