package dataset

import (
	"archive/tar"
	"compress/gzip"
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"sort"
	"time"

	"github.com/concord-labs/concord/store/blob"
)

// LinkStats says how a folder release got its images.
type LinkStats struct {
	Linked, Copied int
}

// WriteDir writes the release into dir, which must be empty or absent:
// manifests, release.json, CARD.md, SHA256SUMS, and with the folders format
// split/label/file, hard-linked from the blob store when it is on the same
// file system, else copied. It writes into a hidden sibling folder and
// renames it to dir at the end, so a failure (a full disk, a missing
// image, a cancel) leaves no half-written release behind.
func (rel *Release) WriteDir(ctx context.Context, blobs blob.Store, dir string) (LinkStats, error) {
	if err := CheckOutDir(dir); err != nil {
		return LinkStats{}, err
	}
	dir = filepath.Clean(dir)
	if err := os.MkdirAll(filepath.Dir(dir), 0o755); err != nil {
		return LinkStats{}, fmt.Errorf("release folder: %w", err)
	}
	tmp, err := os.MkdirTemp(filepath.Dir(dir), "."+filepath.Base(dir)+".partial-")
	if err != nil {
		return LinkStats{}, fmt.Errorf("release folder: %w", err)
	}
	st, err := rel.writeInto(ctx, blobs, tmp)
	if err == nil {
		if err = os.Chmod(tmp, 0o755); err == nil {
			// rename(2) replaces an empty folder at dir, or makes it.
			err = os.Rename(tmp, dir)
		}
	}
	if err != nil {
		os.RemoveAll(tmp)
		return LinkStats{}, fmt.Errorf("release folder %s: %w", dir, err)
	}
	return st, nil
}

// CheckOutDir says whether dir can take a release: absent or empty, so
// releases never mix. Callers check before recording a release.
func CheckOutDir(dir string) error {
	entries, err := os.ReadDir(dir)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return nil
	case err != nil:
		return fmt.Errorf("release folder %s: %w", dir, err)
	case len(entries) > 0:
		return fmt.Errorf("release folder %s: not empty; choose a new folder so releases never mix", dir)
	}
	return nil
}

// writeInto writes the release's files and image folders into dir.
func (rel *Release) writeInto(ctx context.Context, blobs blob.Store, dir string) (LinkStats, error) {
	var st LinkStats
	for _, name := range rel.fileNames() {
		if err := os.WriteFile(filepath.Join(dir, name), rel.Files[name], 0o644); err != nil {
			return st, err
		}
	}
	if !rel.Params.has(FormatFolders) {
		return st, nil
	}
	made := map[string]bool{}
	for _, r := range rel.Rows {
		if err := ctx.Err(); err != nil {
			return st, err
		}
		dst := filepath.Join(dir, filepath.FromSlash(r.File))
		if d := filepath.Dir(dst); !made[d] {
			if err := os.MkdirAll(d, 0o755); err != nil {
				return st, err
			}
			made[d] = true
		}
		linked, err := blob.Materialize(ctx, blobs, r.SHA256, dst)
		if err != nil {
			return st, fmt.Errorf("item %d: %w", r.Item, err)
		}
		if linked {
			st.Linked++
		} else {
			st.Copied++
		}
	}
	return st, nil
}

// fileNames lists the release's own files, checksums last.
func (rel *Release) fileNames() []string {
	var names []string
	for n := range rel.Files {
		if n != SumsFile {
			names = append(names, n)
		}
	}
	sort.Strings(names)
	return append(names, SumsFile)
}

// WriteTarGz streams the release as a .tar.gz to w, with every path under
// a folder named after the release, without temporary files: the images
// are copied from the blob store one by one. Entries carry a fixed time so
// equal releases give equal archives.
func (rel *Release) WriteTarGz(ctx context.Context, w io.Writer, blobs blob.Store) error {
	gz := gzip.NewWriter(w)
	tw := tar.NewWriter(gz)
	root := rel.Params.Name
	epoch := time.Unix(0, 0).UTC()
	header := func(name string, size int64) error {
		return tw.WriteHeader(&tar.Header{Name: path.Join(root, name), Mode: 0o644, Size: size, ModTime: epoch,
			Typeflag: tar.TypeReg, Format: tar.FormatPAX})
	}
	for _, name := range rel.fileNames() {
		if err := header(name, int64(len(rel.Files[name]))); err != nil {
			return fmt.Errorf("release archive: %w", err)
		}
		if _, err := tw.Write(rel.Files[name]); err != nil {
			return fmt.Errorf("release archive: %w", err)
		}
	}
	if rel.Params.has(FormatFolders) {
		for _, r := range rel.Rows {
			if err := ctx.Err(); err != nil {
				return err
			}
			if err := copyBlob(ctx, tw, blobs, r, header); err != nil {
				return fmt.Errorf("release archive: item %d: %w", r.Item, err)
			}
		}
	}
	if err := tw.Close(); err != nil {
		return fmt.Errorf("release archive: %w", err)
	}
	if err := gz.Close(); err != nil {
		return fmt.Errorf("release archive: %w", err)
	}
	return nil
}

func copyBlob(ctx context.Context, tw *tar.Writer, blobs blob.Store, r Row, header func(string, int64) error) error {
	info, err := blobs.Stat(ctx, r.SHA256)
	if err != nil {
		return err
	}
	f, err := blobs.Open(ctx, r.SHA256)
	if err != nil {
		return err
	}
	defer f.Close()
	if err := header(r.File, info.Size); err != nil {
		return err
	}
	if _, err := io.CopyN(tw, f, info.Size); err != nil {
		return err
	}
	return nil
}
