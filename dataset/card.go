package dataset

import (
	"encoding/json"
	"fmt"
	"sort"
	"strings"
)

// renderCard writes CARD.md, the release's human-readable description.
func renderCard(in ReleaseInput, rel *Release) []byte {
	p := in.Params
	var b strings.Builder
	fmt.Fprintf(&b, "# %s\n\n", p.Name)
	if in.Project != "" {
		fmt.Fprintf(&b, "Release of the Concord project %q.\n\n", in.Project)
	}
	if in.CardIntro != "" {
		fmt.Fprintf(&b, "%s\n\n", in.CardIntro)
	}
	fmt.Fprintf(&b, "## Contents\n\n%d images, labelled at level %s, split %s (train/validation/test) with seed %d.\n",
		len(rel.Rows), levelName(p.Level), p.Split, p.Seed)
	fmt.Fprintf(&b, "An image is included when its consensus confidence at that level is at least %g, or when a lead decided its label.\n\n", p.MinConfidence)
	b.WriteString("| label | train | validation | test | total | train % | validation % | test % |\n")
	b.WriteString("|---|---:|---:|---:|---:|---:|---:|---:|\n")
	var total [3]int
	for _, l := range rel.Labels {
		c := rel.Counts[l]
		writeCountRow(&b, l, c)
		for s := range c {
			total[s] += c[s]
		}
	}
	writeCountRow(&b, "**all**", total)
	fmt.Fprintf(&b, "\n## How the split was made\n\n%s\n\n", SplitRule)
	b.WriteString("## Vote policy\n\n")
	if len(in.Policy) == 0 {
		b.WriteString("Not recorded.\n")
	}
	keys := make([]string, 0, len(in.Policy))
	for k := range in.Policy {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		fmt.Fprintf(&b, "- %s: %v\n", k, in.Policy[k])
	}
	b.WriteString("\n## Agreement\n\n")
	b.WriteString(agreementText(in.Agreement))
	b.WriteString("\n## Cost\n\n")
	if in.Cost != "" {
		fmt.Fprintf(&b, "%s\n", in.Cost)
	} else {
		b.WriteString("Not recorded.\n")
	}
	fmt.Fprintf(&b, "\n## Taxonomy\n\n%s", treeText(in.Taxonomy))
	b.WriteString("\n## Files\n\n")
	b.WriteString("- `manifest.jsonl` / `manifest.csv`: one line per image: item, file, sha256, split, label, label_path, confidence, votes, group.\n")
	b.WriteString("- `release.json`: the parameters, counts, vote policy and taxonomy, for programs.\n")
	b.WriteString("- `SHA256SUMS`: checksums of every file; check with `sha256sum -c SHA256SUMS`.\n")
	if p.has(FormatFolders) {
		b.WriteString("- `train/`, `validation/`, `test/`: the images, one folder per label.\n")
	}
	b.WriteString("\n## Cautions\n\n")
	b.WriteString("Images from a sorting line can show people (workers' hands, faces, badges) or personal data (letters, labels). " +
		"Before publishing or sharing this dataset, check that you hold the consent and licences your local law requires " +
		"for such images, and remove or blur what you may not share. Consensus labels are the crowd's best estimate, not ground truth: " +
		"the confidence column says how sure.\n")
	return []byte(b.String())
}

func writeCountRow(b *strings.Builder, label string, c [3]int) {
	n := c[0] + c[1] + c[2]
	pct := func(k int) string {
		if n == 0 {
			return "-"
		}
		return fmt.Sprintf("%.1f", 100*float64(k)/float64(n))
	}
	fmt.Fprintf(b, "| %s | %d | %d | %d | %d | %s | %s | %s |\n", label, c[0], c[1], c[2], n, pct(c[0]), pct(c[1]), pct(c[2]))
}

// agreementText lists the engine's top-level figures; nested detail stays
// in release.json.
func agreementText(raw json.RawMessage) string {
	var m map[string]any
	if len(raw) == 0 || json.Unmarshal(raw, &m) != nil || len(m) == 0 {
		return "The agreement engine has not reported figures for this project yet.\n"
	}
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var b strings.Builder
	for _, k := range keys {
		switch v := m[k].(type) {
		case float64:
			fmt.Fprintf(&b, "- %s: %.4g\n", k, v)
		case string, bool:
			fmt.Fprintf(&b, "- %s: %v\n", k, v)
		}
	}
	if b.Len() == 0 {
		return "See `agreement` in release.json.\n"
	}
	return b.String()
}
