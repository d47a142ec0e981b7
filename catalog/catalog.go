// Package catalog is the parameter catalogue: for every kind of reported
// quantity (a parameter or a derived one), the section of the estimates
// table it is shown in, whether it is shown there at all, its row in the
// manuscript table and its words there, and the kind of its within-person
// standardized version. The model terms (sampler/term_*.go) register the
// kinds they report; the terminal table, summary.json, the manuscript
// tables and the HTML report read them here. It imports nothing of
// lagstar's.
package catalog

import (
	"fmt"
	"strings"
	"sync"
)

// Section is a section of the estimates table (terminal and HTML report).
type Section int

// The sections, in table order.
const (
	Measurement Section = iota
	Between
	Within
	Derived
	// Probability holds effects on the probability scale (derived).
	Probability
)

// SectionTitles are the sections' headings, in table order.
var SectionTitles = []string{
	Measurement: "Measurement (latent-response scale)",
	Between:     "Between persons (random intercepts)",
	Within:      "Within persons",
	Derived:     "Derived",
	Probability: "Effects on the probability scale (derived; associations, not causal effects)",
}

// ManuscriptSections are the manuscript table's sections, in order.
var ManuscriptSections = []string{"Thresholds", "Between persons", "Within persons", "Intraclass correlations (latent)", "Effects on the probability scale", "Impulse responses (latent within part)"}

// Names is what a label is built from: one entry's outcome names (display
// names in manuscripts), its category index and occasion.
type Names struct {
	Outcome, From string
	Pair          []string // the two outcomes of a correlation
	Index         int
	Occasion      *int
}

// At is ", occasion t" for an occasion-specific entry, else "".
func (n Names) At() string {
	if n.Occasion == nil {
		return ""
	}
	return fmt.Sprintf(", occasion %d", *n.Occasion)
}

// PairLabel joins a correlation's two outcomes ("A & B").
func (n Names) PairLabel() string { return strings.Join(n.Pair, " & ") }

// Kind describes one kind of reported quantity.
type Kind struct {
	Name string
	// Section is the estimates-table section; Tabled says whether the kind
	// is shown there (and written to draws.csv, for derived kinds) at all.
	Section Section
	Tabled  bool
	// Manuscript is the manuscript-table section (one of
	// ManuscriptSections), "" when the kind is not in that table.
	Manuscript string
	// Label renders an entry in words for a manuscript (nil: its name).
	Label func(Names) string
	// Standardized is the kind of the entry's within-person standardized
	// version, shown beside it in the manuscript table ("" none).
	Standardized string
	// FirstOccasion marks kinds that rest on the first occasion alone.
	FirstOccasion bool
}

var (
	mu    sync.RWMutex
	kinds = map[string]Kind{}
	order []string
)

// Register adds kinds to the catalogue (terms call it from init). A kind
// registered twice must be identical in name; the later one wins.
func Register(ks ...Kind) {
	mu.Lock()
	defer mu.Unlock()
	for _, k := range ks {
		if _, ok := kinds[k.Name]; !ok {
			order = append(order, k.Name)
		}
		kinds[k.Name] = k
	}
}

// Lookup returns the kind named name; ok is false for an unknown kind.
func Lookup(name string) (Kind, bool) {
	mu.RLock()
	defer mu.RUnlock()
	k, ok := kinds[name]
	return k, ok
}

// Tabled reports whether kind name is shown in the estimates table.
func Tabled(name string) bool {
	k, ok := Lookup(name)
	return ok && k.Tabled
}

// Label renders an entry of kind name in words (its fallback when the kind
// has no label).
func Label(name, fallback string, n Names) string {
	k, ok := Lookup(name)
	if !ok || k.Label == nil {
		return fallback
	}
	return k.Label(n)
}

// Kinds returns every registered kind in registration order.
func Kinds() []Kind {
	mu.RLock()
	defer mu.RUnlock()
	out := make([]Kind, len(order))
	for i, n := range order {
		out[i] = kinds[n]
	}
	return out
}
