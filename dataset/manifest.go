package dataset

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strings"
	"unicode/utf8"
)

// ManifestRow is one image named by an import manifest.
type ManifestRow struct {
	Line       int    // line of the CSV file, for messages
	Path       string // cleaned, relative to the manifest's folder
	Group      string // items of one group always share a split
	PriorLabel string // a label the images came with, kept for reference
}

// maxManifestField bounds group and prior_label, which end up in releases.
const maxManifestField = 200

// ParseManifest reads an import manifest: CSV with a header naming a path
// column and optionally group and prior_label. Paths must be relative and
// stay inside the manifest's folder; every broken row is reported with its
// line, not only the first.
func ParseManifest(r io.Reader, name string) ([]ManifestRow, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err != nil {
		if errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("%s: empty manifest: want a header line with a path column", name)
		}
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	col := map[string]int{"path": -1, "group": -1, "prior_label": -1}
	for i, h := range header {
		h = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(h, "\ufeff")))
		at, known := col[h]
		switch {
		case !known:
			return nil, fmt.Errorf("%s:1: column %d: unknown column %q (want path, group, prior_label)", name, i+1, h)
		case at >= 0:
			return nil, fmt.Errorf("%s:1: column %d: column %q given twice", name, i+1, h)
		}
		col[h] = i
	}
	if col["path"] < 0 {
		return nil, fmt.Errorf("%s:1: no path column (want path, group, prior_label)", name)
	}
	var rows []ManifestRow
	var problems []string
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			// csv.ParseError names the line already.
			problems = append(problems, fmt.Sprintf("%s: %v", name, err))
			if len(problems) >= 20 || !errors.As(err, new(*csv.ParseError)) {
				break
			}
			continue
		}
		line, _ := cr.FieldPos(0)
		row := ManifestRow{Line: line}
		field := func(c string) string {
			if i := col[c]; i >= 0 {
				return strings.TrimSpace(rec[i])
			}
			return ""
		}
		p, problem := cleanManifestPath(field("path"))
		row.Path, row.Group, row.PriorLabel = p, field("group"), field("prior_label")
		for _, f := range []struct{ name, v string }{{"group", row.Group}, {"prior_label", row.PriorLabel}} {
			if problem == "" && (len(f.v) > maxManifestField || !utf8.ValidString(f.v)) {
				problem = fmt.Sprintf("%s: longer than %d bytes or not UTF-8", f.name, maxManifestField)
			}
		}
		if problem != "" {
			problems = append(problems, fmt.Sprintf("%s:%d: %s", name, line, problem))
			if len(problems) >= 20 {
				break
			}
			continue
		}
		rows = append(rows, row)
	}
	if len(problems) > 0 {
		return nil, errors.New(strings.Join(problems, "\n"))
	}
	return rows, nil
}

// cleanManifestPath refuses paths that could leave the manifest's folder by
// their spelling; symbolic links are checked later, against the disk.
func cleanManifestPath(p string) (string, string) {
	switch {
	case p == "":
		return "", "path: empty"
	case strings.ContainsRune(p, 0) || !utf8.ValidString(p):
		return "", "path: not valid text"
	case filepath.IsAbs(p) || strings.HasPrefix(p, "/") || strings.HasPrefix(p, `\`) || filepath.VolumeName(p) != "":
		return "", fmt.Sprintf("path %q: absolute paths are refused; give it relative to the manifest's folder", p)
	}
	c := filepath.Clean(filepath.FromSlash(p))
	if c == ".." || strings.HasPrefix(c, ".."+string(filepath.Separator)) {
		return "", fmt.Sprintf("path %q: leads outside the manifest's folder", p)
	}
	if c == "." {
		return "", fmt.Sprintf("path %q: names the folder, not a file", p)
	}
	return c, ""
}
