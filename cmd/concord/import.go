package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store/blob"
)

const importUsage = "import --project SLUG [flags] FOLDER|MANIFEST.csv"

func runImport(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "import", importUsage)
	slug := fs.String("project", "", "project slug (required)")
	data := fs.String("data", defaultDataDir(), "folder for the image store")
	maxBytes := fs.Int64("max-bytes", dataset.DefaultMaxBytes, "skip files larger than this many bytes")
	maxPixels := fs.Int64("max-pixels", dataset.DefaultMaxPixels, "skip images with more pixels than this")
	distance := fs.Int("near-duplicate-distance", dataset.DefaultNearDuplicateDistance, "perceptual hashes this many bits apart or fewer are near-duplicates")
	batch := fs.Int("batch", dataset.DefaultBatchSize, "files written per transaction")
	workers := fs.Int("workers", 0, "images decoded in parallel (default: one per CPU)")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	if *slug == "" || fs.NArg() != 1 {
		fs.Usage()
		return usagef("import: want --project SLUG and one folder or manifest")
	}
	if *distance < 1 || *distance > dataset.MaxNearDuplicateDistance {
		return usagef("import: --near-duplicate-distance %d: want 1 to %d", *distance, dataset.MaxNearDuplicateDistance)
	}
	s, p, closeDB, err := openProject(ctx, e, *slug)
	if err != nil {
		return err
	}
	defer closeDB()
	blobs, err := blob.NewLocal(*data)
	if err != nil {
		return err
	}
	im := &dataset.Importer{Store: s, Blobs: blobs, MaxBytes: *maxBytes, MaxPixels: *maxPixels,
		BatchSize: *batch, Workers: *workers, Distance: *distance}
	im.Progress = progressReporter(e)
	rep, err := im.ImportPath(ctx, p.ID, fs.Arg(0))
	printImportReport(e.stdout, rep)
	if err != nil {
		return err
	}
	return nil
}

// progressReporter draws a bar when stderr is a terminal, and otherwise
// logs a line every ten seconds so logs of long imports stay short.
func progressReporter(e *env) func(dataset.Progress) {
	if f, ok := e.stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		var bar *progressbar.ProgressBar
		return func(p dataset.Progress) {
			if bar == nil {
				bar = progressbar.NewOptions(p.Total, progressbar.OptionSetWriter(f),
					progressbar.OptionSetDescription("importing"), progressbar.OptionShowCount(),
					progressbar.OptionShowIts(), progressbar.OptionSetItsString("images"),
					progressbar.OptionSetPredictTime(true), progressbar.OptionThrottle(100*time.Millisecond),
					progressbar.OptionClearOnFinish())
			}
			bar.Set(p.Done)
			if p.Done == p.Total {
				bar.Finish()
			}
		}
	}
	var last time.Duration
	return func(p dataset.Progress) {
		if p.Elapsed-last < 10*time.Second && p.Done != p.Total {
			return
		}
		last = p.Elapsed
		rate := float64(p.Done) / max(p.Elapsed.Seconds(), 1e-9)
		left := time.Duration(float64(p.Total-p.Done) / max(rate, 1e-9) * float64(time.Second))
		e.logger.Info("import", "done", p.Done, "total", p.Total, "imported", p.Imported,
			"per_second", fmt.Sprintf("%.1f", rate), "left", left.Round(time.Second))
	}
}

func printImportReport(w io.Writer, r dataset.Report) {
	for _, s := range r.Skipped {
		fmt.Fprintf(w, "skipped %s: %s\n", s.Name, s.Reason)
	}
	for _, d := range r.Duplicates {
		fmt.Fprintf(w, "duplicate %s: same bytes as %s\n", d.Name, d.Of)
	}
	rate := float64(r.Seen) / max(r.Elapsed.Seconds(), 1e-9)
	fmt.Fprintf(w, "%d files looked at in %s (%.0f a second): %d imported, %d already in the project, %d duplicates, %d skipped, %d non-image files ignored\n",
		r.Seen, r.Elapsed.Round(time.Millisecond), rate, r.Imported, r.Existing, len(r.Duplicates), len(r.Skipped), r.Ignored)
	fmt.Fprintf(w, "near-duplicates: %d clusters holding %d images\n", r.Clusters, r.ClusteredItems)
}
