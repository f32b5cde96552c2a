package blob_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/concord-labs/concord/store/blob"
)

func keyOf(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

func TestLocalPutOpenStat(t *testing.T) {
	ctx := context.Background()
	l, err := blob.NewLocal(t.TempDir())
	if err != nil {
		t.Fatal(err)
	}
	data := []byte("PET bottle on the belt")
	key := keyOf(data)
	info, err := l.Put(ctx, key, bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	if info.Size != int64(len(data)) {
		t.Errorf("size %d, want %d", info.Size, len(data))
	}
	path, _ := l.Path(key)
	if want := filepath.Join(l.Root(), key[:2], key[2:4], key); path != want {
		t.Errorf("path %s, want %s", path, want)
	}
	// A second put of the same key keeps one file and succeeds.
	if _, err := l.Put(ctx, key, bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	r, err := l.Open(ctx, key)
	if err != nil {
		t.Fatal(err)
	}
	got, _ := io.ReadAll(r)
	r.Close()
	if !bytes.Equal(got, data) {
		t.Errorf("read %q, want %q", got, data)
	}
	st, err := l.Stat(ctx, key)
	if err != nil || st.Size != int64(len(data)) {
		t.Errorf("stat = %+v, %v", st, err)
	}
	if _, err := l.Stat(ctx, keyOf([]byte("other"))); !errors.Is(err, blob.ErrNotFound) {
		t.Errorf("stat of a missing blob: %v, want ErrNotFound", err)
	}
	if _, err := l.Open(ctx, keyOf([]byte("other"))); !errors.Is(err, blob.ErrNotFound) {
		t.Errorf("open of a missing blob: %v, want ErrNotFound", err)
	}
}

func TestLocalRejectsWrongBytes(t *testing.T) {
	ctx := context.Background()
	l, _ := blob.NewLocal(t.TempDir())
	key := keyOf([]byte("aluminium can"))
	if _, err := l.Put(ctx, key, bytes.NewReader([]byte("cardboard"))); !errors.Is(err, blob.ErrDigestMismatch) {
		t.Fatalf("put with the wrong bytes: %v, want ErrDigestMismatch", err)
	}
	if _, err := l.Stat(ctx, key); !errors.Is(err, blob.ErrNotFound) {
		t.Errorf("a rejected put left a blob: %v", err)
	}
}

func TestKeysCannotEscape(t *testing.T) {
	ctx := context.Background()
	l, _ := blob.NewLocal(t.TempDir())
	for _, key := range []string{
		"", "../../etc/passwd", "/etc/passwd",
		"ABCDEF0123456789abcdef0123456789abcdef0123456789abcdef0123456789", // upper case
		"0123456789abcdef0123456789abcdef0123456789abcdef0123456789abcde",  // 63 digits
		"0123456789abcdef0123456789abcdef0123456789abcdef0123456789abcde/",
		"..23456789abcdef0123456789abcdef0123456789abcdef0123456789abcdef",
	} {
		if _, err := l.Put(ctx, key, bytes.NewReader(nil)); !errors.Is(err, blob.ErrBadKey) {
			t.Errorf("Put(%q): %v, want ErrBadKey", key, err)
		}
		if _, err := l.Open(ctx, key); !errors.Is(err, blob.ErrBadKey) {
			t.Errorf("Open(%q): %v, want ErrBadKey", key, err)
		}
		if _, err := l.Path(key); !errors.Is(err, blob.ErrBadKey) {
			t.Errorf("Path(%q): %v, want ErrBadKey", key, err)
		}
	}
}

func TestMaterializeLinks(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	l, _ := blob.NewLocal(filepath.Join(dir, "blobs"))
	data := []byte("glass shard")
	key := keyOf(data)
	if _, err := l.Put(ctx, key, bytes.NewReader(data)); err != nil {
		t.Fatal(err)
	}
	dst := filepath.Join(dir, "out.jpg")
	linked, err := blob.Materialize(ctx, l, key, dst)
	if err != nil {
		t.Fatal(err)
	}
	if !linked {
		t.Error("same file system, yet the blob was copied, not linked")
	}
	a, _ := os.Stat(dst)
	src, _ := l.Path(key)
	b, _ := os.Stat(src)
	if !os.SameFile(a, b) {
		t.Error("materialized file is not the blob's file")
	}
}
