// Package blob stores image bytes by their SHA-256, so the same bytes are
// kept once however often they are imported. Store is small on purpose: a
// local folder implements it now and an S3-compatible bucket can later,
// because nothing above it depends on files. It must not import anything of
// Concord's but the standard library.
package blob

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
)

var (
	// ErrNotFound means no blob has this key.
	ErrNotFound = errors.New("blob not found")
	// ErrBadKey means the key is not 64 lower-case hex digits. Keys are
	// checked before they touch a path, so no key can name a file outside
	// the store.
	ErrBadKey = errors.New("blob key must be 64 lower-case hex digits")
	// ErrDigestMismatch means the bytes written do not hash to the key.
	ErrDigestMismatch = errors.New("blob bytes do not match their key")
)

// Info describes a stored blob.
type Info struct {
	Key  string
	Size int64
}

// Store keeps blobs by the lower-case hex SHA-256 of their bytes.
type Store interface {
	// Put stores the bytes read from r under key, checking that they hash to
	// it. Putting a key that exists already reads r to the end and keeps the
	// stored copy.
	Put(ctx context.Context, key string, r io.Reader) (Info, error)
	// Open returns the blob's bytes; the caller closes them.
	Open(ctx context.Context, key string) (io.ReadCloser, error)
	// Stat says whether the blob exists and how large it is.
	Stat(ctx context.Context, key string) (Info, error)
}

// Pather is a Store whose blobs are files, so a release can hard-link them
// instead of copying.
type Pather interface {
	Path(key string) (string, error)
}

// CheckKey returns ErrBadKey unless key is 64 lower-case hex digits.
func CheckKey(key string) error {
	if len(key) != 64 {
		return fmt.Errorf("%w: %q", ErrBadKey, truncate(key))
	}
	for i := 0; i < len(key); i++ {
		c := key[i]
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return fmt.Errorf("%w: %q", ErrBadKey, truncate(key))
		}
	}
	return nil
}

func truncate(s string) string {
	if len(s) > 80 {
		return s[:80] + "..."
	}
	return s
}

// Materialize makes the blob appear as the file dst: a hard link when s
// keeps files on the same file system, else a copy. It reports whether it
// linked. dst must not exist.
func Materialize(ctx context.Context, s Store, key, dst string) (linked bool, err error) {
	if p, ok := s.(Pather); ok {
		src, err := p.Path(key)
		if err != nil {
			return false, err
		}
		if err := os.Link(src, dst); err == nil {
			return true, nil
		}
	}
	r, err := s.Open(ctx, key)
	if err != nil {
		return false, err
	}
	defer r.Close()
	f, err := os.OpenFile(dst, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return false, err
	}
	if _, err := io.Copy(f, r); err != nil {
		f.Close()
		return false, fmt.Errorf("copy blob %s to %s: %w", key, dst, err)
	}
	return false, f.Close()
}
