package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"strings"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/taxonomy"
)

const taxonomyUsage = `taxonomy check FILE                     validate a taxonomy file and print its tree (no database)
       concord taxonomy import --project SLUG FILE    replace a project's taxonomy (keys keep their votes)
       concord taxonomy show --project SLUG           print a project's taxonomy as a tree
       concord taxonomy export --project SLUG [--json] print a project's taxonomy in the file format (or JSON)`

func runTaxonomy(ctx context.Context, e *env, args []string) error {
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" {
		fmt.Fprintln(e.stderr, "Usage: concord "+taxonomyUsage)
		if len(args) == 0 {
			return usagef("taxonomy: say check, import, show or export")
		}
		return nil
	}
	fs := newFlagSet(e, "taxonomy "+args[0], taxonomyUsage)
	project := fs.String("project", "", "project slug")
	asJSON := fs.Bool("json", false, "export: JSON instead of the text format")
	if err := parseFlags(e, fs, args[1:]); err != nil {
		return err
	}
	switch args[0] {
	case "check":
		if fs.NArg() != 1 {
			return usagef("taxonomy check: give one FILE")
		}
		t, err := readTaxonomyFile(fs.Arg(0))
		if err != nil {
			return err
		}
		printTree(e, t)
		fmt.Fprintf(e.stdout, "%s: %d labels, %d leaves, depth %d: ok\n", fs.Arg(0), t.Len(), len(t.Leaves()), maxDepth(t)+1)
		return nil
	case "import":
		if *project == "" || fs.NArg() != 1 {
			return usagef("taxonomy import: need --project SLUG and one FILE")
		}
		t, err := readTaxonomyFile(fs.Arg(0))
		if err != nil {
			return err
		}
		s, p, closeDB, err := openProject(ctx, e, *project)
		if err != nil {
			return err
		}
		defer closeDB()
		if err := s.ReplaceTaxonomy(ctx, p.ID, store.LabelInputsOf(t)); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "project %s: taxonomy of %d labels (%d leaves) imported from %s\n", p.Slug, t.Len(), len(t.Leaves()), fs.Arg(0))
		return nil
	case "show", "export":
		if *project == "" {
			return usagef("taxonomy %s: need --project SLUG", args[0])
		}
		s, p, closeDB, err := openProject(ctx, e, *project)
		if err != nil {
			return err
		}
		defer closeDB()
		t, _, err := s.Taxonomy(ctx, p.ID)
		if err != nil {
			return err
		}
		if args[0] == "show" {
			printTree(e, t)
			return nil
		}
		if *asJSON {
			enc := json.NewEncoder(e.stdout)
			enc.SetIndent("", "  ")
			return enc.Encode(t)
		}
		return taxonomy.Format(e.stdout, t)
	default:
		return usagef("taxonomy: unknown action %q (check, import, show or export)", args[0])
	}
}

// readTaxonomyFile parses a text file, or JSON when the name ends in .json.
func readTaxonomyFile(path string) (*taxonomy.Taxonomy, error) {
	if !strings.HasSuffix(path, ".json") {
		return taxonomy.ParseFile(path)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var t taxonomy.Taxonomy
	if err := json.Unmarshal(b, &t); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &t, nil
}

func printTree(e *env, t *taxonomy.Taxonomy) {
	for i := 0; i < t.Len(); i++ {
		n := t.Node(i)
		line := strings.Repeat("  ", n.Depth) + n.Key
		if n.Name != n.Key {
			line += "  (" + n.Name + ")"
		}
		fmt.Fprintln(e.stdout, line)
	}
}

func maxDepth(t *taxonomy.Taxonomy) int {
	d := 0
	for i := 0; i < t.Len(); i++ {
		d = max(d, t.Depth(i))
	}
	return d
}
