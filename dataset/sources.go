package dataset

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"mime/multipart"
	"os"
	"path/filepath"
	"strings"
)

// Source is one file to import. The CLI makes them from a folder or a
// manifest; the web upload from multipart files.
type Source struct {
	Name       string // shown in reports (relative path or upload name)
	Open       func() (io.ReadCloser, error)
	Group      string
	PriorLabel string
}

// FileSource imports the file at path, reported as name.
func FileSource(path, name string) Source {
	return Source{Name: name, Open: func() (io.ReadCloser, error) { return os.Open(path) }}
}

// MultipartSource imports an uploaded file.
func MultipartSource(fh *multipart.FileHeader) Source {
	return Source{Name: fh.Filename, Open: func() (io.ReadCloser, error) { return fh.Open() }}
}

// imageExtensions are the files a folder import picks up; anything else in
// the folder is counted as ignored.
var imageExtensions = map[string]bool{".jpg": true, ".jpeg": true, ".png": true, ".gif": true, ".webp": true}

// folderSources lists the images under root (recursively, hidden entries
// left out). Symbolic links are followed only when they stay inside root.
func folderSources(root string) (srcs []Source, skipped []Skip, ignored int, err error) {
	realRoot, err := filepath.EvalSymlinks(root)
	if err != nil {
		return nil, nil, 0, fmt.Errorf("import folder %s: %w", root, err)
	}
	err = filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, path)
		if rel != "." && strings.HasPrefix(d.Name(), ".") {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		if !imageExtensions[strings.ToLower(filepath.Ext(path))] {
			ignored++
			return nil
		}
		if d.Type()&fs.ModeSymlink != 0 {
			if _, ok := inside(realRoot, path); !ok {
				skipped = append(skipped, Skip{Name: rel, Reason: "symbolic link leads outside the import folder"})
				return nil
			}
		} else if !d.Type().IsRegular() {
			ignored++
			return nil
		}
		srcs = append(srcs, FileSource(path, filepath.ToSlash(rel)))
		return nil
	})
	if err != nil {
		return nil, nil, 0, fmt.Errorf("import folder %s: %w", root, err)
	}
	return srcs, skipped, ignored, nil
}

// manifestSources reads a manifest and resolves its paths against its
// folder. A path that leads outside (through .., an absolute path or a
// symbolic link) fails the whole import: such a manifest is a mistake or an
// attack, and importing the rest would hide it.
func manifestSources(manifest string) ([]Source, []Skip, error) {
	f, err := os.Open(manifest)
	if err != nil {
		return nil, nil, fmt.Errorf("import manifest: %w", err)
	}
	defer f.Close()
	rows, err := ParseManifest(f, manifest)
	if err != nil {
		return nil, nil, err
	}
	root := filepath.Dir(manifest)
	realRoot, err := filepath.EvalSymlinks(root)
	if err != nil {
		return nil, nil, fmt.Errorf("import manifest %s: %w", manifest, err)
	}
	var srcs []Source
	var skipped []Skip
	for _, r := range rows {
		path := filepath.Join(root, r.Path)
		real, ok := inside(realRoot, path)
		if !ok {
			if real == "" {
				skipped = append(skipped, Skip{Name: r.Path, Reason: fmt.Sprintf("%s:%d: path: file not found", manifest, r.Line)})
				continue
			}
			return nil, nil, fmt.Errorf("%s:%d: path %q: leads outside the manifest's folder (through a symbolic link)", manifest, r.Line, r.Path)
		}
		s := FileSource(real, filepath.ToSlash(r.Path))
		s.Group, s.PriorLabel = r.Group, r.PriorLabel
		srcs = append(srcs, s)
	}
	return srcs, skipped, nil
}

// inside resolves path's symbolic links and says whether the result lies
// under realRoot (itself resolved). real is "" when path does not exist.
func inside(realRoot, path string) (real string, ok bool) {
	real, err := filepath.EvalSymlinks(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return "", false
		}
		return path, false
	}
	rel, err := filepath.Rel(realRoot, real)
	if err != nil || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) || filepath.IsAbs(rel) {
		return real, false
	}
	return real, true
}
