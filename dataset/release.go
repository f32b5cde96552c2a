package dataset

import (
	"cmp"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"regexp"
	"slices"
	"strconv"
	"strings"
)

// Release formats.
const (
	FormatJSONL   = "jsonl"
	FormatCSV     = "csv"
	FormatFolders = "folders"
)

// ReleaseParams are what a lead chooses when cutting a release.
type ReleaseParams struct {
	Name          string
	Seed          int64
	Split         Fractions
	MinConfidence float64
	Level         int      // LevelLeaf or a depth
	Formats       []string // of FormatJSONL, FormatCSV, FormatFolders
}

var releaseName = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$`)

// ParseFormats reads a comma-separated list such as "jsonl,csv,folders".
func ParseFormats(s string) ([]string, error) {
	var out []string
	for _, f := range strings.Split(s, ",") {
		f = strings.TrimSpace(f)
		switch f {
		case FormatJSONL, FormatCSV, FormatFolders:
			if !slices.Contains(out, f) {
				out = append(out, f)
			}
		default:
			return nil, fmt.Errorf("format %q: want jsonl, csv or folders", f)
		}
	}
	if !slices.Contains(out, FormatJSONL) && !slices.Contains(out, FormatCSV) {
		return nil, fmt.Errorf("formats %q: want at least one manifest (jsonl or csv)", s)
	}
	slices.Sort(out)
	return out, nil
}

// Validate checks the parameters.
func (p ReleaseParams) Validate() error {
	if !releaseName.MatchString(p.Name) {
		return fmt.Errorf("release name %q: want 1-100 letters, digits, '.', '_' or '-', starting with a letter or digit", p.Name)
	}
	if p.Split[0]+p.Split[1]+p.Split[2] != 100 || min(p.Split[0], p.Split[1], p.Split[2]) < 0 {
		return fmt.Errorf("split %v: want whole percentages summing to 100", p.Split)
	}
	if !(p.MinConfidence >= 0 && p.MinConfidence <= 1) {
		return fmt.Errorf("min confidence %v: want a number from 0 to 1", p.MinConfidence)
	}
	if p.Level < LevelLeaf {
		return fmt.Errorf("level %d: want leaf or a depth >= 0", p.Level)
	}
	_, err := ParseFormats(strings.Join(p.Formats, ","))
	return err
}

func (p ReleaseParams) has(format string) bool { return slices.Contains(p.Formats, format) }

// Candidate is an item of the project as a release sees it.
type Candidate struct {
	ID        int64
	SHA256    [32]byte
	MediaType string
	ClusterID int64
	GroupKey  string
	Votes     int
	Vote      Vote
}

// ReleaseInput is everything a release is computed from; the same input
// gives byte-identical files.
type ReleaseInput struct {
	Params     ReleaseParams
	Project    string // project name, for the card
	Items      []Candidate
	Taxonomy   []TaxNode
	Pins       map[int64]Split // splits of earlier releases (see AssignSplits)
	Policy     map[string]any  // vote policy, for release.json and the card
	Agreement  json.RawMessage // project_stats.summary, when the engine has run
	Cost       string          // "123.40 EUR for 6,170 votes", when known
	CardIntro  string          // optional paragraph from the lead
	ProjectURL string
}

// Row is one item of a release.
type Row struct {
	Item       int64
	File       string // path inside the release (where folders put it)
	SHA256     string
	Split      Split
	Label      string
	LabelPath  string
	Confidence float64
	Votes      int
	Group      int64
}

// Counts are items per label per split.
type Counts map[string][3]int

// Release is a computed release: rows and every file but the images.
type Release struct {
	Params         ReleaseParams
	Rows           []Row
	Counts         Counts
	Labels         []string  // labels that occur, in taxonomy order
	Taxonomy       []TaxNode // the taxonomy the release was cut with, recorded with it
	Files          map[string][]byte
	ManifestSHA256 [32]byte // of manifest.jsonl, recorded in the database
}

// File names of a release.
const (
	ManifestJSONL = "manifest.jsonl"
	ManifestCSV   = "manifest.csv"
	ReleaseJSON   = "release.json"
	CardFile      = "CARD.md"
	SumsFile      = "SHA256SUMS"
)

var extensions = map[string]string{"image/jpeg": ".jpg", "image/png": ".png", "image/gif": ".gif", "image/webp": ".webp"}

// BuildRelease selects the items sure enough at the level, assigns splits,
// and renders the manifests, release.json, the card and the checksums.
func BuildRelease(in ReleaseInput) (*Release, error) {
	p := in.Params
	if err := p.Validate(); err != nil {
		return nil, err
	}
	lab, err := newLabeller(in.Taxonomy, p.Level, p.MinConfidence)
	if err != nil {
		return nil, err
	}
	items := in.Items
	byID := func(a, b Candidate) int { return cmp.Compare(a.ID, b.ID) }
	if !slices.IsSortedFunc(items, byID) {
		items = slices.Clone(items)
		slices.SortFunc(items, byID)
	}
	gi := make([]GroupItem, len(items))
	for i, it := range items {
		gi[i] = GroupItem{ID: it.ID, ClusterID: it.ClusterID, GroupKey: it.GroupKey}
	}
	// Groups span every item, released or not, so that a group's key does
	// not depend on which of its items are sure enough today.
	splits, groups := AssignSplits(gi, p.Seed, p.Split, in.Pins)
	rel := &Release{Params: p, Rows: make([]Row, 0, len(items)), Counts: Counts{}, Files: map[string][]byte{}}
	for i, it := range items {
		node, conf, ok := lab.choose(it.Vote)
		if !ok {
			continue
		}
		key := in.Taxonomy[node].Key
		r := Row{Item: it.ID, SHA256: hex.EncodeToString(it.SHA256[:]), Split: splits[i], Label: key,
			LabelPath: lab.paths[node], Confidence: conf, Votes: it.Votes, Group: groups[i]}
		r.File = r.Split.String() + "/" + key + "/" + strconv.FormatInt(it.ID, 10) + extensions[it.MediaType]
		rel.Rows = append(rel.Rows, r)
		c := rel.Counts[key]
		c[r.Split]++
		rel.Counts[key] = c
	}
	for _, n := range in.Taxonomy {
		if _, ok := rel.Counts[n.Key]; ok {
			rel.Labels = append(rel.Labels, n.Key)
		}
	}
	rel.Taxonomy = in.Taxonomy
	jsonl := renderJSONL(rel.Rows)
	rel.ManifestSHA256 = sha256.Sum256(jsonl)
	if p.has(FormatJSONL) {
		rel.Files[ManifestJSONL] = jsonl
	}
	if p.has(FormatCSV) {
		rel.Files[ManifestCSV] = renderCSV(rel.Rows)
	}
	rj, err := renderReleaseJSON(in, rel, "")
	if err != nil {
		return nil, err
	}
	rel.Files[ReleaseJSON] = rj
	rel.Files[CardFile] = renderCard(in, rel)
	rel.Files[SumsFile] = rel.sums()
	return rel, nil
}

func appendRow(b []byte, r Row, jsonForm bool) []byte {
	if jsonForm {
		b = append(b, `{"item":`...)
		b = strconv.AppendInt(b, r.Item, 10)
		b = append(b, `,"file":"`...)
		b = append(b, r.File...)
		b = append(b, `","sha256":"`...)
		b = append(b, r.SHA256...)
		b = append(b, `","split":"`...)
		b = append(b, r.Split.String()...)
		b = append(b, `","label":"`...)
		b = append(b, r.Label...)
		b = append(b, `","label_path":"`...)
		b = append(b, r.LabelPath...)
		b = append(b, `","confidence":`...)
		b = strconv.AppendFloat(b, r.Confidence, 'f', -1, 64)
		b = append(b, `,"votes":`...)
		b = strconv.AppendInt(b, int64(r.Votes), 10)
		b = append(b, `,"group":"`...)
		b = strconv.AppendInt(b, r.Group, 10)
		return append(b, "\"}\n"...)
	}
	// Keys, paths and hex never hold commas, quotes or line breaks (the
	// taxonomy's key rule), so no field needs CSV quoting.
	b = strconv.AppendInt(b, r.Item, 10)
	for _, s := range []string{r.File, r.SHA256, r.Split.String(), r.Label, r.LabelPath} {
		b = append(b, ',')
		b = append(b, s...)
	}
	b = append(b, ',')
	b = strconv.AppendFloat(b, r.Confidence, 'f', -1, 64)
	b = append(b, ',')
	b = strconv.AppendInt(b, int64(r.Votes), 10)
	b = append(b, ',')
	b = strconv.AppendInt(b, r.Group, 10)
	return append(b, '\n')
}

// renderJSONL writes one JSON object per item, by item id, with a fixed
// field order and no timestamps, so equal inputs give equal bytes.
func renderJSONL(rows []Row) []byte {
	b := make([]byte, 0, len(rows)*220)
	for _, r := range rows {
		b = appendRow(b, r, true)
	}
	return b
}

func renderCSV(rows []Row) []byte {
	b := make([]byte, 0, 80+len(rows)*160)
	b = append(b, "item,file,sha256,split,label,label_path,confidence,votes,group\n"...)
	for _, r := range rows {
		b = appendRow(b, r, false)
	}
	return b
}

// sums lists the SHA-256 of every file of the release, images included (an
// image's hash is its item's), in sha256sum's format, sorted by path.
func (rel *Release) sums() []byte {
	type entry struct{ path, sum string }
	var es []entry
	for name, data := range rel.Files {
		s := sha256.Sum256(data)
		es = append(es, entry{name, hex.EncodeToString(s[:])})
	}
	if rel.Params.has(FormatFolders) {
		for _, r := range rel.Rows {
			es = append(es, entry{r.File, r.SHA256})
		}
	}
	slices.SortFunc(es, func(a, b entry) int { return strings.Compare(a.path, b.path) })
	b := make([]byte, 0, len(es)*100)
	for _, e := range es {
		b = append(b, e.sum...)
		b = append(b, "  "...)
		b = append(b, e.path...)
		b = append(b, '\n')
	}
	return b
}

func levelName(level int) string {
	if level == LevelLeaf {
		return "leaf"
	}
	return strconv.Itoa(level)
}

// SplitRule says in words how items are split, for release.json and the card.
const SplitRule = "Items are grouped by near-duplicate cluster and manifest group (connected components); " +
	"each group's split is a hash of the seed and the group's smallest item id (SplitMix64, 100 buckets dealt out by percent), " +
	"so a group never straddles splits and keeps its split as the dataset grows. If a new item joins two earlier groups, " +
	"the merged group takes the highest split any of its items had in an earlier release (test over validation over train). " +
	"Items released before keep their split whatever the seed and split of a later release, which deal out only new groups, " +
	"so a test item never becomes a training item. Label shares per split follow " +
	"the target only statistically: for labels with at least 1,000 groups, within about 5 percentage points."

// renderReleaseJSON writes release.json; reissued, when not empty, says
// how a release rebuilt from its record differs from its first issue.
func renderReleaseJSON(in ReleaseInput, rel *Release, reissued string) ([]byte, error) {
	type tax struct {
		Key    string `json:"key"`
		Name   string `json:"name"`
		Parent string `json:"parent,omitempty"`
		Depth  int    `json:"depth"`
	}
	keyOf := map[int64]string{}
	var taxonomy []tax
	for _, n := range in.Taxonomy {
		keyOf[n.ID] = n.Key
		taxonomy = append(taxonomy, tax{n.Key, n.Name, keyOf[n.ParentID], n.Depth})
	}
	counts := map[string]map[string]int{}
	totals := map[string]int{}
	for label, c := range rel.Counts {
		counts[label] = map[string]int{"train": c[0], "validation": c[1], "test": c[2]}
		for s, n := range c {
			totals[Split(s).String()] += n
		}
	}
	doc := struct {
		Name           string                    `json:"name"`
		Project        string                    `json:"project"`
		Seed           int64                     `json:"seed"`
		Split          map[string]int            `json:"split_percent"`
		MinConfidence  float64                   `json:"min_confidence"`
		Level          string                    `json:"level"`
		Formats        []string                  `json:"formats"`
		Items          int                       `json:"items"`
		Totals         map[string]int            `json:"items_per_split"`
		Counts         map[string]map[string]int `json:"items_per_label_and_split"`
		ManifestSHA256 string                    `json:"manifest_jsonl_sha256"`
		SplitRule      string                    `json:"split_rule"`
		Policy         map[string]any            `json:"vote_policy,omitempty"`
		Agreement      json.RawMessage           `json:"agreement,omitempty"`
		Cost           string                    `json:"cost,omitempty"`
		Taxonomy       []tax                     `json:"taxonomy"`
		Reissued       string                    `json:"reissued,omitempty"`
	}{
		in.Params.Name, in.Project, in.Params.Seed,
		map[string]int{"train": in.Params.Split[0], "validation": in.Params.Split[1], "test": in.Params.Split[2]},
		in.Params.MinConfidence, levelName(in.Params.Level), in.Params.Formats, len(rel.Rows), totals, counts,
		hex.EncodeToString(rel.ManifestSHA256[:]), SplitRule, in.Policy, nil, in.Cost, taxonomy, reissued,
	}
	if len(in.Agreement) > 0 && json.Valid(in.Agreement) && string(in.Agreement) != "{}" {
		doc.Agreement = in.Agreement
	}
	b, err := json.MarshalIndent(doc, "", "  ")
	if err != nil {
		return nil, fmt.Errorf("release.json: %w", err)
	}
	return append(b, '\n'), nil
}
