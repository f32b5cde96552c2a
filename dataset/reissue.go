package dataset

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/concord-labs/concord/store"
)

// RecordMismatchError says a release rebuilt from its recorded rows does
// not give the manifest whose checksum was recorded with it: the record
// was altered (or damaged) after the release was cut.
type RecordMismatchError struct {
	Name   string
	Reason string
}

func (e *RecordMismatchError) Error() string {
	return fmt.Sprintf("release %q: the recorded rows do not reproduce the recorded manifest: %s", e.Name, e.Reason)
}

// RecordedParams are the parameters a recorded release was cut with.
func RecordedParams(rec store.Release) (ReleaseParams, error) {
	p := ReleaseParams{Name: rec.Name, Seed: rec.Seed, MinConfidence: rec.MinConfidence, Level: LevelLeaf,
		Split: Fractions{rec.SplitTrain, rec.SplitVal, rec.SplitTest}}
	if rec.Level != nil {
		p.Level = *rec.Level
	}
	var err error
	if p.Formats, err = ParseFormats(rec.Formats); err != nil {
		return p, fmt.Errorf("release %q: recorded formats: %w", rec.Name, err)
	}
	if err := p.Validate(); err != nil {
		return p, fmt.Errorf("release %q: recorded parameters: %w", rec.Name, err)
	}
	return p, nil
}

// Load rebuilds a recorded release from its own record, not from the
// project as it is now: the rows of release_items (split, label, confidence,
// votes, group), the items' SHA-256 and media type, the recorded
// parameters, the recorded taxonomy snapshot for label paths and the
// recorded release.json. New votes, new items or a reshaped taxonomy
// therefore do not change it. The manifest is checked against the recorded
// checksum; a mismatch is a *RecordMismatchError.
func (r *Releaser) Load(ctx context.Context, projectID int64, name string) (*Release, store.Release, error) {
	rec, err := r.Store.ReleaseByName(ctx, projectID, name)
	if err != nil {
		return nil, store.Release{}, err
	}
	items, err := r.Store.ReleasedItems(ctx, rec.ID)
	if err != nil {
		return nil, rec, err
	}
	// The current taxonomy only fills in paths of labels the card's
	// snapshot lacks (a card recorded empty); the checksum still decides.
	labels, err := r.Store.Labels(ctx, projectID)
	if err != nil {
		return nil, rec, err
	}
	current := make([]TaxNode, len(labels))
	for i, l := range labels {
		current[i] = TaxNode{ID: l.ID, Key: l.Key, Name: l.Name, Depth: l.Depth, IsLeaf: l.IsLeaf}
		if l.ParentID != nil {
			current[i].ParentID = *l.ParentID
		}
	}
	rel, err := Reissue(rec, items, current)
	if err != nil {
		return nil, rec, err
	}
	return rel, rec, nil
}

// Reissue rebuilds a recorded release from its record (see Load); current
// is the project's taxonomy today, used only for labels the recorded
// snapshot does not name.
//
// A release recorded with its snapshot (migration 0005 on) comes back
// byte-identical in every file, SHA256SUMS included: release.json is the
// recorded text. An older release takes its taxonomy from the recorded
// card and rebuilds release.json from the record alone, which lacks the
// vote policy, agreement figures and cost that only the card recorded; it
// says so in its "reissued" field.
func Reissue(rec store.Release, items []store.ReleasedItem, current []TaxNode) (*Release, error) {
	p, err := RecordedParams(rec)
	if err != nil {
		return nil, err
	}
	mismatch := func(format string, a ...any) error {
		return &RecordMismatchError{Name: rec.Name, Reason: fmt.Sprintf(format, a...)}
	}
	if len(items) != rec.ItemCount {
		return nil, mismatch("%d item rows, but %d recorded", len(items), rec.ItemCount)
	}
	project, snapshot := parseCard(rec.Card)
	if len(rec.Taxonomy) > 0 {
		if snapshot, err = unmarshalTaxonomy(rec.Taxonomy); err != nil {
			return nil, mismatch("recorded taxonomy: %v", err)
		}
	}
	paths := labelPaths(current)
	for k, v := range labelPaths(snapshot) {
		paths[k] = v
	}
	rel := &Release{Params: p, Rows: make([]Row, len(items)), Counts: Counts{}, Files: map[string][]byte{}, Taxonomy: snapshot}
	for i, it := range items {
		sp, err := ParseSplitName(it.Split)
		if err != nil {
			return nil, mismatch("item %d: %v", it.ItemID, err)
		}
		group, err := strconv.ParseInt(it.GroupKey, 10, 64)
		if err != nil {
			return nil, mismatch("item %d: group %q is not a number", it.ItemID, it.GroupKey)
		}
		path, ok := paths[it.LabelKey]
		if !ok {
			return nil, mismatch("item %d: label %q is in neither the recorded nor the current taxonomy", it.ItemID, it.LabelKey)
		}
		ext, ok := extensions[it.MediaType]
		if !ok {
			return nil, mismatch("item %d: media type %q", it.ItemID, it.MediaType)
		}
		rel.Rows[i] = Row{Item: it.ItemID, SHA256: hex.EncodeToString(it.SHA256[:]), Split: sp, Label: it.LabelKey,
			LabelPath: path, Confidence: it.Confidence, Votes: it.Votes, Group: group,
			File: sp.String() + "/" + it.LabelKey + "/" + strconv.FormatInt(it.ItemID, 10) + ext}
		c := rel.Counts[it.LabelKey]
		c[sp]++
		rel.Counts[it.LabelKey] = c
	}
	jsonl := renderJSONL(rel.Rows)
	if rel.ManifestSHA256 = sha256.Sum256(jsonl); rel.ManifestSHA256 != rec.ManifestSHA256 {
		return nil, mismatch("manifest.jsonl has SHA-256 %x, the record says %x", rel.ManifestSHA256, rec.ManifestSHA256)
	}
	taxonomy := snapshot
	if len(taxonomy) == 0 {
		taxonomy = current
	}
	for _, n := range taxonomy {
		if _, ok := rel.Counts[n.Key]; ok && !slices.Contains(rel.Labels, n.Key) {
			rel.Labels = append(rel.Labels, n.Key)
		}
	}
	var rest []string
	for k := range rel.Counts {
		if !slices.Contains(rel.Labels, k) {
			rest = append(rest, k)
		}
	}
	slices.Sort(rest)
	rel.Labels = append(rel.Labels, rest...)
	if p.has(FormatJSONL) {
		rel.Files[ManifestJSONL] = jsonl
	}
	if p.has(FormatCSV) {
		rel.Files[ManifestCSV] = renderCSV(rel.Rows)
	}
	in := ReleaseInput{Params: p, Project: project, Taxonomy: taxonomy}
	rel.Files[ReleaseJSON] = rec.ReleaseJSON
	if rec.ReleaseJSON == nil {
		if rel.Files[ReleaseJSON], err = renderReleaseJSON(in, rel, reissuedNote); err != nil {
			return nil, err
		}
	}
	rel.Files[CardFile] = []byte(rec.Card)
	if rec.Card == "" {
		rel.Files[CardFile] = renderCard(in, rel)
	}
	rel.Files[SumsFile] = rel.sums()
	return rel, nil
}

const reissuedNote = "Rebuilt from the recorded release; manifests and CARD.md are as first issued. " +
	"Vote policy, agreement and cost were recorded only in CARD.md."

// snapshotLabel is one label in the taxonomy package's JSON form, the form
// releases.taxonomy holds.
type snapshotLabel struct {
	Key      string          `json:"key"`
	Name     string          `json:"name"`
	Children []snapshotLabel `json:"children,omitempty"`
}

// marshalTaxonomy writes a pre-order taxonomy in the taxonomy package's
// JSON form; parents, depths and order survive, ids (which a reshaped
// taxonomy renumbers) do not.
func marshalTaxonomy(nodes []TaxNode) ([]byte, error) {
	var build func(parent int64, from int) ([]snapshotLabel, int)
	build = func(parent int64, from int) ([]snapshotLabel, int) {
		out := []snapshotLabel{}
		i := from
		for i < len(nodes) && nodes[i].ParentID == parent {
			l := snapshotLabel{Key: nodes[i].Key, Name: nodes[i].Name}
			var kids []snapshotLabel
			kids, i = build(nodes[i].ID, i+1)
			if len(kids) > 0 {
				l.Children = kids
			}
			out = append(out, l)
		}
		return out, i
	}
	roots, n := build(0, 0)
	if n != len(nodes) {
		return nil, fmt.Errorf("taxonomy snapshot: label %q is not in pre-order after its parent", nodes[n].Key)
	}
	b, err := json.Marshal(roots)
	if err != nil {
		return nil, fmt.Errorf("taxonomy snapshot: %w", err)
	}
	return b, nil
}

// unmarshalTaxonomy reads marshalTaxonomy's form back into pre-order
// nodes, numbered from 1.
func unmarshalTaxonomy(data []byte) ([]TaxNode, error) {
	var roots []snapshotLabel
	if err := json.Unmarshal(data, &roots); err != nil {
		return nil, err
	}
	var nodes []TaxNode
	var walk func(ls []snapshotLabel, parent int64, depth int)
	walk = func(ls []snapshotLabel, parent int64, depth int) {
		for _, l := range ls {
			n := TaxNode{ID: int64(len(nodes) + 1), ParentID: parent, Key: l.Key, Name: l.Name, Depth: depth, IsLeaf: len(l.Children) == 0}
			nodes = append(nodes, n)
			walk(l.Children, n.ID, depth+1)
		}
	}
	walk(roots, 0, 0)
	return nodes, nil
}

// labelPaths maps each key of a taxonomy in pre-order to its key path.
func labelPaths(nodes []TaxNode) map[string]string {
	byID := make(map[int64]string, len(nodes))
	out := make(map[string]string, len(nodes))
	for _, n := range nodes {
		path := n.Key
		if parent, ok := byID[n.ParentID]; ok && n.ParentID != 0 {
			path = parent + "/" + n.Key
		}
		byID[n.ID] = path
		out[n.Key] = path
	}
	return out
}

// parseCard reads back from a recorded CARD.md the project name and the
// taxonomy snapshot (treeText's "  - key (name)" lines, two spaces per
// level). Keys hold no spaces (the taxonomy's key rule), so the first
// space ends one. A card without them gives "" and nil.
func parseCard(card string) (project string, nodes []TaxNode) {
	const projectLine = "Release of the Concord project "
	if i := strings.Index(card, "\n"+projectLine); i >= 0 {
		line, _, _ := strings.Cut(card[i+1+len(projectLine):], "\n")
		if q, err := strconv.Unquote(strings.TrimSuffix(line, ".")); err == nil {
			project = q
		}
	}
	// The lead's intro comes earlier and may hold anything, so the last
	// taxonomy heading is the generated one.
	i := strings.LastIndex(card, "\n## Taxonomy\n\n")
	if i < 0 {
		return project, nil
	}
	section := card[i+len("\n## Taxonomy\n\n"):]
	if j := strings.Index(section, "\n## "); j >= 0 {
		section = section[:j+1]
	}
	var stack []int64 // ids of the open ancestors, by depth
	for _, line := range strings.Split(strings.TrimRight(section, "\n"), "\n") {
		trimmed := strings.TrimLeft(line, " ")
		indent := len(line) - len(trimmed)
		rest, ok := strings.CutPrefix(trimmed, "- ")
		if !ok || indent%2 != 0 || indent/2 > len(stack) {
			return project, nil
		}
		key, name, _ := strings.Cut(rest, " ")
		depth := indent / 2
		n := TaxNode{ID: int64(len(nodes) + 1), Key: key, Depth: depth, IsLeaf: true,
			Name: strings.TrimSuffix(strings.TrimPrefix(name, "("), ")")}
		stack = stack[:depth]
		if depth > 0 {
			n.ParentID = stack[depth-1]
			nodes[n.ParentID-1].IsLeaf = false
		}
		stack = append(stack, n.ID)
		nodes = append(nodes, n)
	}
	return project, nodes
}
