package blob

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// Local keeps blobs as files under a folder, sharded by the first two bytes
// of the key (ab/cd/abcd...) so no folder grows past 65,536 entries' worth of
// a million images.
type Local struct {
	root string
}

// NewLocal opens (and creates if needed) a blob folder.
func NewLocal(root string) (*Local, error) {
	abs, err := filepath.Abs(root)
	if err != nil {
		return nil, fmt.Errorf("blob folder %s: %w", root, err)
	}
	if err := os.MkdirAll(filepath.Join(abs, "tmp"), 0o755); err != nil {
		return nil, fmt.Errorf("blob folder %s: %w", root, err)
	}
	return &Local{root: abs}, nil
}

// Root is the folder the blobs live in.
func (l *Local) Root() string { return l.root }

// Path returns the file that holds key (it may not exist).
func (l *Local) Path(key string) (string, error) {
	if err := CheckKey(key); err != nil {
		return "", err
	}
	return filepath.Join(l.root, key[0:2], key[2:4], key), nil
}

// Put writes r to a temporary file while hashing it, then renames it into
// place, so a reader never sees half a blob and a crash leaves only litter
// in tmp/.
func (l *Local) Put(ctx context.Context, key string, r io.Reader) (Info, error) {
	path, err := l.Path(key)
	if err != nil {
		return Info{}, err
	}
	if st, err := os.Stat(path); err == nil {
		if _, err := io.Copy(io.Discard, r); err != nil {
			return Info{}, fmt.Errorf("put blob %s: %w", key, err)
		}
		return Info{Key: key, Size: st.Size()}, nil
	}
	tmp, err := os.CreateTemp(filepath.Join(l.root, "tmp"), "put-*")
	if err != nil {
		return Info{}, fmt.Errorf("put blob %s: %w", key, err)
	}
	defer os.Remove(tmp.Name())
	h := sha256.New()
	n, err := io.Copy(io.MultiWriter(tmp, h), contextReader{ctx, r})
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return Info{}, fmt.Errorf("put blob %s: %w", key, err)
	}
	if got := hex.EncodeToString(h.Sum(nil)); got != key {
		return Info{}, fmt.Errorf("put blob %s: %w (bytes hash to %s)", key, ErrDigestMismatch, got)
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return Info{}, fmt.Errorf("put blob %s: %w", key, err)
	}
	if err := os.Chmod(tmp.Name(), 0o444); err != nil {
		return Info{}, fmt.Errorf("put blob %s: %w", key, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return Info{}, fmt.Errorf("put blob %s: %w", key, err)
	}
	return Info{Key: key, Size: n}, nil
}

// Open returns the blob's file.
func (l *Local) Open(ctx context.Context, key string) (io.ReadCloser, error) {
	path, err := l.Path(key)
	if err != nil {
		return nil, err
	}
	f, err := os.Open(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("open blob %s: %w", key, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("open blob %s: %w", key, err)
	}
	return f, nil
}

// Stat reports the blob's size.
func (l *Local) Stat(ctx context.Context, key string) (Info, error) {
	path, err := l.Path(key)
	if err != nil {
		return Info{}, err
	}
	st, err := os.Stat(path)
	if errors.Is(err, fs.ErrNotExist) {
		return Info{}, fmt.Errorf("stat blob %s: %w", key, ErrNotFound)
	}
	if err != nil {
		return Info{}, fmt.Errorf("stat blob %s: %w", key, err)
	}
	return Info{Key: key, Size: st.Size()}, nil
}

// contextReader stops a long copy when the context ends.
type contextReader struct {
	ctx context.Context
	r   io.Reader
}

func (c contextReader) Read(p []byte) (int, error) {
	if err := c.ctx.Err(); err != nil {
		return 0, err
	}
	return c.r.Read(p)
}
