package main

import (
	"context"
	"fmt"
	"slices"
	"strconv"

	"github.com/concord-labs/concord/dataset"
	"github.com/concord-labs/concord/store/blob"
)

const releaseUsage = "release --project SLUG --name NAME --out DIR [--split 80/10/10] [--seed S] [--min-confidence 0.95] [--level leaf|N] [--format jsonl,csv,folders]"

func runRelease(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "release", releaseUsage)
	slug := fs.String("project", "", "project slug (required)")
	name := fs.String("name", "", "release name, new for the project (required)")
	out := fs.String("out", "", "folder to write the release to; must be empty or absent (required)")
	split := fs.String("split", dataset.DefaultFractions.String(), "train/validation/test percentages")
	seed := fs.String("seed", "", "split seed (default: the project's release seed)")
	minConf := fs.Float64("min-confidence", 0.95, "include items whose consensus confidence at the level is at least this")
	level := fs.String("level", "leaf", "taxonomy depth of the labels: leaf, or 0 for the roots, 1, 2...")
	formats := fs.String("format", "jsonl,csv", "outputs: jsonl, csv, folders (comma-separated)")
	data := fs.String("data", defaultDataDir(), "folder of the image store")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	if *slug == "" || *name == "" || *out == "" || fs.NArg() != 0 {
		fs.Usage()
		return usagef("release: want --project, --name and --out")
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
	s, closeDB, err := openStore(ctx, e)
	if err != nil {
		return err
	}
	defer closeDB()
	proj, err := s.ProjectBySlug(ctx, *slug)
	if err != nil {
		return err
	}
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
