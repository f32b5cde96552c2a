package dataset

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"image"
	"image/color"
	_ "image/gif" // registers the GIF decoder
	"image/jpeg"
	_ "image/png" // registers the PNG decoder
	"io"
	"os"
	"runtime"
	"strings"
	"sync"
	"time"

	"golang.org/x/image/draw"
	_ "golang.org/x/image/webp" // registers the WebP decoder

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/store/blob"
)

// Defaults for an Importer's zero fields.
const (
	DefaultMaxBytes  = 50 << 20   // 50 MiB a file
	DefaultMaxPixels = 60_000_000 // 60 megapixels, checked before decoding
	DefaultBatchSize = 200        // files per transaction
	ThumbMaxSide     = 256        // pixels, longest side of a thumbnail
)

// mediaTypes maps the decoders' format names to the media types items keep.
var mediaTypes = map[string]string{"jpeg": "image/jpeg", "png": "image/png", "gif": "image/gif", "webp": "image/webp"}

// Importer adds image files to a project. The CLI and the web upload share
// it. Zero fields take the defaults above.
type Importer struct {
	Store     *store.Store
	Blobs     blob.Store
	MaxBytes  int64
	MaxPixels int64
	BatchSize int
	Workers   int // decoders in parallel; GOMAXPROCS when 0
	// Distance is the near-duplicate threshold; DefaultNearDuplicateDistance when 0.
	Distance int
	// Progress, when set, is called after each batch and once at the end.
	Progress func(Progress)
}

// Progress is how far an import has got.
type Progress struct {
	Done, Total int
	Imported    int
	Elapsed     time.Duration
}

// Skip is a file left out, and why.
type Skip struct {
	Name   string
	Reason string
}

// Duplicate is a file whose bytes another file of the same import had.
type Duplicate struct {
	Name string
	Of   string
}

// Report is the outcome of an import.
type Report struct {
	Seen       int         // files looked at
	Imported   int         // new items
	Existing   int         // files whose bytes the project had before this import
	Duplicates []Duplicate // files whose bytes an earlier file of this import had
	Skipped    []Skip      // unreadable, unsupported, too large or missing files
	Ignored    int         // non-image files in an imported folder
	// Clusters counts near-duplicate clusters of two or more items over the
	// whole project after the import; ClusteredItems the items in them.
	Clusters       int
	ClusteredItems int
	Elapsed        time.Duration
}

// ThumbKey is the blob key of an item's thumbnail (a JPEG at most
// ThumbMaxSide pixels a side); the web serves it from the blob store.
func ThumbKey(it store.Item) string { return it.ThumbKey }

// ImportPath imports a folder (recursively) or a manifest CSV file.
func (im *Importer) ImportPath(ctx context.Context, projectID int64, path string) (Report, error) {
	st, err := os.Stat(path)
	if err != nil {
		return Report{}, fmt.Errorf("import: %w", err)
	}
	var srcs []Source
	var pre Report
	switch {
	case st.IsDir():
		srcs, pre.Skipped, pre.Ignored, err = folderSources(path)
	case strings.EqualFold(pathExt(path), ".csv"):
		srcs, pre.Skipped, err = manifestSources(path)
	default:
		return Report{}, fmt.Errorf("import %s: not a folder or a .csv manifest", path)
	}
	if err != nil {
		return Report{}, err
	}
	rep, err := im.ImportFiles(ctx, projectID, srcs)
	rep.Skipped = append(pre.Skipped, rep.Skipped...)
	rep.Ignored += pre.Ignored
	return rep, err
}

func pathExt(p string) string {
	if i := strings.LastIndexByte(p, '.'); i >= 0 {
		return p[i:]
	}
	return ""
}

// decoded is what a worker makes of one source.
type decoded struct {
	item     store.NewItem
	existing bool
	skip     string
}

// ImportFiles imports sources in batches: workers read, hash, check and
// decode files in parallel, while each batch is written in one transaction
// in the order given. Files the project has already are skipped without
// decoding, so a re-run resumes where an interrupted one stopped. The
// project's near-duplicate clusters are recomputed at the end, so new
// images can join old clusters.
func (im *Importer) ImportFiles(ctx context.Context, projectID int64, sources []Source) (Report, error) {
	start := time.Now()
	var rep Report
	known, err := im.Store.ItemSHAs(ctx, projectID)
	if err != nil {
		return rep, fmt.Errorf("import: %w", err)
	}
	batch := im.BatchSize
	if batch <= 0 {
		batch = DefaultBatchSize
	}
	seen := map[[32]byte]string{}
	var pending chan error
	var pendingCount *int
	wait := func() error {
		if pending == nil {
			return nil
		}
		err := <-pending
		rep.Imported += *pendingCount
		pending = nil
		return err
	}
	for lo := 0; lo < len(sources); lo += batch {
		part := sources[lo:min(lo+batch, len(sources))]
		results := im.decodeAll(ctx, part, known)
		if err := ctx.Err(); err != nil {
			wait()
			return rep, fmt.Errorf("import: %w", err)
		}
		var rows []store.NewItem
		for i, r := range results {
			rep.Seen++
			name := part[i].Name
			switch {
			case r.skip != "":
				rep.Skipped = append(rep.Skipped, Skip{Name: name, Reason: r.skip})
			case r.existing:
				rep.Existing++
			case seen[r.item.SHA256] != "":
				rep.Duplicates = append(rep.Duplicates, Duplicate{Name: name, Of: seen[r.item.SHA256]})
			default:
				seen[r.item.SHA256] = name
				rows = append(rows, r.item)
			}
		}
		if err := wait(); err != nil {
			return rep, err
		}
		// Writing this batch overlaps decoding the next.
		pending, pendingCount = make(chan error, 1), new(int)
		go func(rows []store.NewItem, count *int, done chan<- error) {
			ids, err := im.Store.InsertItems(ctx, projectID, rows)
			*count = len(ids)
			done <- err
		}(rows, pendingCount, pending)
		if im.Progress != nil {
			im.Progress(Progress{Done: rep.Seen, Total: len(sources), Imported: rep.Imported + len(rows), Elapsed: time.Since(start)})
		}
	}
	if err := wait(); err != nil {
		return rep, fmt.Errorf("import: %w", err)
	}
	if err := im.recluster(ctx, projectID, &rep); err != nil {
		return rep, err
	}
	rep.Elapsed = time.Since(start)
	if im.Progress != nil {
		im.Progress(Progress{Done: rep.Seen, Total: len(sources), Imported: rep.Imported, Elapsed: rep.Elapsed})
	}
	return rep, nil
}

func (im *Importer) decodeAll(ctx context.Context, part []Source, known map[[32]byte]int64) []decoded {
	out := make([]decoded, len(part))
	workers := im.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	next := make(chan int)
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range next {
				out[i] = im.decodeOne(ctx, part[i], known)
			}
		}()
	}
	for i := range part {
		if ctx.Err() != nil {
			break
		}
		next <- i
	}
	close(next)
	wg.Wait()
	return out
}

func (im *Importer) decodeOne(ctx context.Context, src Source, known map[[32]byte]int64) decoded {
	maxBytes, maxPixels := im.MaxBytes, im.MaxPixels
	if maxBytes <= 0 {
		maxBytes = DefaultMaxBytes
	}
	if maxPixels <= 0 {
		maxPixels = DefaultMaxPixels
	}
	f, err := src.Open()
	if err != nil {
		return decoded{skip: "cannot open: " + err.Error()}
	}
	data, err := io.ReadAll(io.LimitReader(f, maxBytes+1))
	f.Close()
	switch {
	case err != nil:
		return decoded{skip: "cannot read: " + err.Error()}
	case int64(len(data)) > maxBytes:
		return decoded{skip: fmt.Sprintf("larger than the limit of %d bytes", maxBytes)}
	case len(data) == 0:
		return decoded{skip: "empty file"}
	}
	sha := sha256.Sum256(data)
	if _, ok := known[sha]; ok {
		return decoded{existing: true}
	}
	cfg, format, err := image.DecodeConfig(bytes.NewReader(data))
	if err != nil {
		return decoded{skip: "not a readable JPEG, PNG, GIF or WebP image: " + err.Error()}
	}
	mt, ok := mediaTypes[format]
	if !ok {
		return decoded{skip: "unsupported image format " + format}
	}
	if cfg.Width <= 0 || cfg.Height <= 0 {
		return decoded{skip: fmt.Sprintf("image has no pixels (%dx%d)", cfg.Width, cfg.Height)}
	}
	// Checked before decoding, so a small file claiming a huge image cannot
	// exhaust memory.
	if int64(cfg.Width)*int64(cfg.Height) > maxPixels {
		return decoded{skip: fmt.Sprintf("%dx%d pixels is over the limit of %d", cfg.Width, cfg.Height, maxPixels)}
	}
	img, _, err := image.Decode(bytes.NewReader(data))
	if err != nil {
		return decoded{skip: "corrupt " + format + " image: " + err.Error()}
	}
	thumb, err := thumbnail(img)
	if err != nil {
		return decoded{skip: "cannot make a thumbnail: " + err.Error()}
	}
	key := hex.EncodeToString(sha[:])
	tsum := sha256.Sum256(thumb)
	thumbKey := hex.EncodeToString(tsum[:])
	if _, err := im.Blobs.Put(ctx, key, bytes.NewReader(data)); err != nil {
		return decoded{skip: "cannot store: " + err.Error()}
	}
	if _, err := im.Blobs.Put(ctx, thumbKey, bytes.NewReader(thumb)); err != nil {
		return decoded{skip: "cannot store the thumbnail: " + err.Error()}
	}
	return decoded{item: store.NewItem{
		SHA256: sha, FileKey: key, ThumbKey: thumbKey, OriginalName: src.Name, MediaType: mt,
		Bytes: int64(len(data)), Width: cfg.Width, Height: cfg.Height, PHash: PHash(img),
		GroupKey: src.Group, PriorLabel: src.PriorLabel,
	}}
}

// thumbnail scales img to fit ThumbMaxSide and encodes it as JPEG, over
// white so transparent PNGs and GIFs do not turn black.
func thumbnail(img image.Image) ([]byte, error) {
	b := img.Bounds()
	w, h := b.Dx(), b.Dy()
	if side := max(w, h); side > ThumbMaxSide {
		w, h = max(1, w*ThumbMaxSide/side), max(1, h*ThumbMaxSide/side)
	}
	dst := image.NewRGBA(image.Rect(0, 0, w, h))
	draw.Draw(dst, dst.Bounds(), image.NewUniform(color.White), image.Point{}, draw.Src)
	draw.CatmullRom.Scale(dst, dst.Bounds(), img, b, draw.Over, nil)
	var buf bytes.Buffer
	if err := jpeg.Encode(&buf, dst, &jpeg.Options{Quality: 80}); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// recluster recomputes near-duplicate clusters over the whole project and
// stores the ids that changed.
func (im *Importer) recluster(ctx context.Context, projectID int64, rep *Report) error {
	ids, hashes, old, err := im.Store.PerceptualHashes(ctx, projectID)
	if err != nil {
		return fmt.Errorf("import: %w", err)
	}
	dist := im.Distance
	if dist == 0 {
		dist = DefaultNearDuplicateDistance
	}
	clusters, err := Cluster(ids, hashes, dist)
	if err != nil {
		return fmt.Errorf("import: %w", err)
	}
	var chIDs, chClusters []int64
	size := map[int64]int{}
	for i, c := range clusters {
		size[c]++
		if c != old[i] {
			chIDs, chClusters = append(chIDs, ids[i]), append(chClusters, c)
		}
	}
	for _, n := range size {
		if n > 1 {
			rep.Clusters++
			rep.ClusteredItems += n
		}
	}
	if err := im.Store.SetClusters(ctx, projectID, chIDs, chClusters); err != nil {
		return fmt.Errorf("import: %w", err)
	}
	return nil
}
