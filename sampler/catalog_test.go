package sampler

import (
	"testing"

	"github.com/lagstar/lagstar/catalog"
)

// TestEveryKindInCatalogue: every kind a registered term reports, as a
// parameter or a derived quantity, is in the parameter catalogue (else the
// tables would drop it), over models that turn every term on.
func TestEveryKindInCatalogue(t *testing.T) {
	seen := map[string]bool{}
	for _, p := range problems()[:3] {
		p.n = 20
		l := p.layout(t)
		for _, q := range append(l.Params(), l.DerivedParams()...) {
			seen[q.Kind] = true
			if _, ok := catalog.Lookup(q.Kind); !ok {
				t.Errorf("kind %q (%s) is not in the catalogue", q.Kind, q.Name)
			}
		}
	}
	for _, k := range []string{"threshold", "mean", "ri_variance", "ri_correlation", "autoregression", "crosslag",
		"innovation_correlation", "initial_correlation", "std_crosslag", "icc", "category_probability"} {
		if !seen[k] {
			t.Errorf("no test model reports kind %q", k)
		}
	}
}
