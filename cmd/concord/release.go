package main

import (
	"context"
	"flag"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store/blob"
)

const releaseUsage = `release --project SLUG --name NAME --out DIR [--split 80/10/10] [--seed S] [--min-confidence 0.95] [--level leaf|N] [--format jsonl,csv,folders]
       concord release --project SLUG --name NAME --out DIR --existing

The first form cuts a new release from the project's current consensus and records it.
With --existing, a release recorded earlier is written again exactly as it was cut (every
file the same byte for byte, checked against its recorded checksum), however the project changed since;
it takes its split, seed, level, confidence and formats from the record.`

// cutFlags are the options that choose a new release; --existing takes
// them from the record instead.
var cutFlags = []string{"split", "seed", "min-confidence", "level", "format"}

func runRelease(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "release", releaseUsage)
	slug := fs.String("project", "", "project slug (required)")
	name := fs.String("name", "", "release name: new for the project, or with --existing a recorded one (required)")
	out := fs.String("out", "", "folder to write the release to; must be empty or absent (required)")
	split := fs.String("split", dataset.DefaultFractions.String(), "train/validation/test percentages")
	seed := fs.String("seed", "", "split seed (default: the project's release seed)")
	minConf := fs.Float64("min-confidence", 0.95, "include items whose consensus confidence at the level is at least this")
	level := fs.String("level", "leaf", "taxonomy depth of the labels: leaf, or 0 for the roots, 1, 2...")
	formats := fs.String("format", "jsonl,csv", "outputs: jsonl, csv, folders (comma-separated)")
	data := fs.String("data", defaultDataDir(), "folder of the image store")
	existing := fs.Bool("existing", false, "write the recorded release NAME again instead of cutting a new one")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	if *slug == "" || *name == "" || *out == "" || fs.NArg() != 0 {
		fs.Usage()
		return usagef("release: want --project, --name and --out")
	}
	if *existing {
		var given []string
		fs.Visit(func(f *flag.Flag) {
			if slices.Contains(cutFlags, f.Name) {
				given = append(given, "--"+f.Name)
			}
		})
		if len(given) > 0 {
			return usagef("release --existing: %s come from the recorded release; leave them out", strings.Join(given, ", "))
		}
		return writeExisting(ctx, e, *slug, *name, *out, *data)
	}
	var p dataset.ReleaseParams
	var err error
	p.Name, p.MinConfidence = *name, *minConf
	if p.Split, err = dataset.ParseFractions(*split); err != nil {
		return usagef("release: --split: %v", err)
	}
	if p.Level, err = dataset.ParseLevel(*level); err != nil {
		return usagef("release: --level: %v", err)
	}
	if p.Formats, err = dataset.ParseFormats(*formats); err != nil {
		return usagef("release: --format: %v", err)
	}
	if err := p.Validate(); err != nil {
		return usagef("release: %v", err)
	}
	s, proj, closeDB, err := openProject(ctx, e, *slug)
	if err != nil {
		return err
	}
	defer closeDB()
	p.Seed = proj.ReleaseSeed
	if *seed != "" {
		if p.Seed, err = strconv.ParseInt(*seed, 10, 64); err != nil {
			return usagef("release: --seed %q: want a whole number", *seed)
		}
	}
	blobs, err := blob.NewLocal(*data)
	if err != nil {
		return err
	}
	// A folder that cannot take the release is refused before the release
	// is recorded.
	if err := dataset.CheckOutDir(*out); err != nil {
		return err
	}
	rel, rec, err := (&dataset.Releaser{Store: s}).Create(ctx, proj.ID, p, nil)
	if err != nil {
		return err
	}
	st, err := rel.WriteDir(ctx, blobs, *out)
	if err != nil {
		return fmt.Errorf("release %q is recorded (id %d) but writing it failed: %w", rec.Name, rec.ID, err)
	}
	w := e.stdout
	fmt.Fprintf(w, "release %s (id %d): %d items, split %s, seed %d, level %s, min confidence %g\n",
		rec.Name, rec.ID, len(rel.Rows), p.Split, p.Seed, *level, p.MinConfidence)
	fmt.Fprintf(w, "%-24s %8s %10s %8s\n", "label", "train", "validation", "test")
	for _, l := range rel.Labels {
		c := rel.Counts[l]
		fmt.Fprintf(w, "%-24s %8d %10d %8d\n", l, c[0], c[1], c[2])
	}
	if slices.Contains(p.Formats, dataset.FormatFolders) {
		fmt.Fprintf(w, "images: %d hard-linked, %d copied\n", st.Linked, st.Copied)
	}
	fmt.Fprintf(w, "written to %s\n", *out)
	return nil
}

// writeExisting writes a recorded release again from its record.
func writeExisting(ctx context.Context, e *env, slug, name, out, data string) error {
	s, proj, closeDB, err := openProject(ctx, e, slug)
	if err != nil {
		return err
	}
	defer closeDB()
	blobs, err := blob.NewLocal(data)
	if err != nil {
		return err
	}
	rel, rec, err := (&dataset.Releaser{Store: s}).Load(ctx, proj.ID, name)
	if err != nil {
		return err
	}
	st, err := rel.WriteDir(ctx, blobs, out)
	if err != nil {
		return err
	}
	w := e.stdout
	fmt.Fprintf(w, "release %s (id %d, cut %s): %d items, split %s, seed %d, level %s, min confidence %g\n",
		rec.Name, rec.ID, rec.CreatedAt.UTC().Format("2006-01-02 15:04 UTC"), len(rel.Rows), rel.Params.Split,
		rec.Seed, levelText(rel.Params.Level), rec.MinConfidence)
	fmt.Fprintf(w, "manifest SHA-256 %x matches the record\n", rec.ManifestSHA256)
	if slices.Contains(rel.Params.Formats, dataset.FormatFolders) {
		fmt.Fprintf(w, "images: %d hard-linked, %d copied\n", st.Linked, st.Copied)
	}
	fmt.Fprintf(w, "written to %s\n", out)
	return nil
}

func levelText(level int) string {
	if level == dataset.LevelLeaf {
		return "leaf"
	}
	return strconv.Itoa(level)
}
