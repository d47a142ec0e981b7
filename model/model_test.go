package model

import (
	"math"
	"strings"
	"testing"
)

const spec2 = `data: {file: d.csv, person: who, occasion: wave}
outcomes:
  - {name: mood, type: ordinal, categories: 4, lowest: 1}
  - {name: sick, type: binary, labels: ["no", "yes"]}
within: {lags: cross}
`

func mustSpec(t *testing.T, text string) *Spec {
	t.Helper()
	sp, err := ParseSpec("m.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	return sp
}

// TestPanelGridGapsOrder: rows in any order, string ids, a skipped wave is
// a missing occasion, trailing occasions without data are dropped.
func TestPanelGridGapsOrder(t *testing.T) {
	sp := mustSpec(t, spec2)
	csv := "who,wave,mood,sick\n" +
		"bo,5,2,no\n" +
		"al,1,1,yes\n" +
		"al,5,4,NA\n" +
		"bo,1,3,\n" +
		"al,2,,no\n" +
		"cy,9,NA,NA\n" + // no observed value: dropped, but wave 9 joins the grid
		"bo,2,NA,NA\n"
	pan, err := ParsePanel(sp, "d.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	if got := pan.Occasions; len(got) != 4 || got[0] != 1 || got[1] != 2 || got[2] != 5 || got[3] != 9 {
		t.Fatalf("grid = %v, want [1 2 5 9]", got)
	}
	if strings.Join(pan.Persons, ",") != "al,bo" {
		t.Fatalf("persons = %v, want [al bo]", pan.Persons)
	}
	// Each kept person spans grid positions up to the last observed one (wave 5 = index 2).
	if pan.Len[0] != 3 || pan.Len[1] != 3 {
		t.Errorf("lengths = %v, want [3 3]", pan.Len)
	}
	J := 2
	cell := func(i, tt, j int) float64 { return pan.Y[pan.Offset[i]+tt*J+j] }
	if cell(0, 0, 0) != 0 || cell(0, 0, 1) != 1 || !math.IsNaN(cell(0, 1, 0)) || cell(0, 2, 0) != 3 || !math.IsNaN(cell(0, 2, 1)) {
		t.Errorf("person al cells wrong: %v", pan.Y[:6])
	}
	if cell(1, 0, 0) != 2 || !math.IsNaN(cell(1, 0, 1)) || !math.IsNaN(cell(1, 1, 0)) {
		t.Errorf("person bo cells wrong: %v", pan.Y[6:12])
	}
	if len(pan.Notes) == 0 || !strings.Contains(strings.Join(pan.Notes, " "), "cy") {
		t.Errorf("notes %q should mention the dropped person cy", pan.Notes)
	}
}

func TestPersonsSortedNumerically(t *testing.T) {
	sp := mustSpec(t, strings.Replace(spec2, `labels: ["no", "yes"]`, "categories: 2", 1))
	csv := "who,wave,mood,sick\n10,1,1,0\n9,1,2,1\n100,1,3,0\n"
	pan, err := ParsePanel(sp, "d.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(pan.Persons, ","); got != "9,10,100" {
		t.Errorf("persons = %s, want 9,10,100", got)
	}
}

func TestLowestInferredAndNotes(t *testing.T) {
	sp := mustSpec(t, `data: {file: d.csv, person: p, occasion: t}
outcomes: [{name: y, type: ordinal, categories: 5}]
within: {lags: none}
`)
	pan, err := ParsePanel(sp, "d.csv", []byte("p,t,y\n1,1,1\n1,2,2\n2,1,4\n2,2,2\n"))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(pan.Outcomes[0].Codes, ","); got != "1,2,3,4,5" {
		t.Errorf("codes = %s, want 1..5", got)
	}
	if !strings.Contains(strings.Join(pan.Notes, " "), "category 3, 5 never observed") {
		t.Errorf("notes = %q, want a never-observed note", pan.Notes)
	}
}

func TestSpecDefaults(t *testing.T) {
	sp := mustSpec(t, "data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}, {name: b, type: binary}]\n")
	if !sp.Between.RandomIntercepts || sp.Within.Lags != LagsCross || !sp.Within.ResidualCorrelation ||
		sp.Within.PathsFree || sp.Within.StationaryStart || !sp.Means.Free || sp.Sampler.Chains != 4 ||
		sp.Sampler.Warmup != 1000 || sp.Sampler.Draws != 1000 || sp.Sampler.SeedSet || sp.Sampler.ThresholdUpdate != ThresholdJoint {
		t.Errorf("defaults wrong: %+v", sp)
	}
	one := mustSpec(t, "data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nwithin: {lags: own}\n")
	if one.Within.ResidualCorrelation {
		t.Error("one outcome: residual correlation should default to false")
	}
}

// TestSpecErrors checks that each model-file mistake is reported with its line.
func TestSpecErrors(t *testing.T) {
	cases := []struct{ text, want string }{
		{"data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binari}]\n", `m.yaml:2: outcome "a": type: expected one of ordinal, binary, continuous, got "binari" (did you mean "binary"?)`},
		{"data: {file: d.csv, person: p}\noutcomes: [{name: a, type: binary}]\n", `data: missing key "occasion"`},
		{"data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: ordinal, categories: 2}]\n", "an ordinal outcome needs 3 to 11 categories"},
		{"data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nsampler: {chains: many}\n", `m.yaml:3: sampler.chains: expected a whole number from 1 to 64, got "many"`},
		{"data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}, {name: a, type: binary}]\n", `"a" is listed twice`},
		{"data: [1, 2]\noutcomes: [{name: a, type: binary}]\n", "data: expected a set of keys"},
		{"data: {file: d.csv\n", "not valid YAML"},
		{"", "model file is empty"},
	}
	for _, c := range cases {
		_, err := ParseSpec("m.yaml", []byte(c.text))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("ParseSpec(%q) error = %v, want it to contain %q", c.text, err, c.want)
		}
		if err != nil && !IsInputError(err) {
			t.Errorf("error %v is not an InputError", err)
		}
	}
}

func TestIdentifyRules(t *testing.T) {
	base := "data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\n"
	two := "p,t,a\n1,1,0\n1,2,1\n2,1,1\n2,2,0\n"
	three := "p,t,a\n1,1,0\n1,2,1\n1,3,1\n2,1,1\n2,2,0\n2,3,0\n"
	cases := []struct {
		within, data, want string
	}{
		{"within: {lags: own}", two, "needs at least three occasions"},
		{"within: {lags: own}", three, ""},
		{"within: {lags: own, over_time: free}", three, "need at least four occasions"},
		{"within: {lags: own, over_time: free, first_occasion: stationary}", three, "stationary needs within.over_time: equal"},
		{"within: {lags: none}\nbetween: {random_intercepts: true}", "p,t,a\n1,1,0\n2,1,1\n", "needs at least two occasions"},
	}
	for _, c := range cases {
		sp := mustSpec(t, base+c.within+"\n")
		pan, err := ParsePanel(sp, "d.csv", []byte(c.data))
		if err != nil {
			t.Fatal(err)
		}
		err = Identify(sp, pan)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: unexpected refusal: %v", c.within, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s: error = %v, want %q", c.within, err, c.want)
		}
	}
}
