package model

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
	"time"
)

const spec2 = `data: {csv: d.csv, person: who, occasion: wave}
outcomes:
  - {name: mood, type: ordinal, categories: 4, lowest: 1}
  - {name: sick, type: binary, labels: ["no", "yes"]}
dynamics: {lags: cross}
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
// a missing occasion, trailing occasions without data are dropped, and
// the grid steps by the spacing of the occasion values (here 2), with an
// occasion nobody was asked about (7) inserted and noted.
func TestPanelGridGapsOrder(t *testing.T) {
	sp := mustSpec(t, spec2)
	csv := "who,wave,mood,sick\n" +
		"bo,5,2,no\n" +
		"al,1,1,yes\n" +
		"al,5,4,NA\n" +
		"bo,1,3,\n" +
		"al,3,,no\n" +
		"cy,9,NA,NA\n" + // no observed value: dropped, but wave 9 joins the grid
		"bo,3,NA,NA\n"
	pan, err := ParsePanel(sp, "d.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	if got := pan.Occasions; !slices.Equal(got, []int{1, 3, 5, 7, 9}) {
		t.Fatalf("grid = %v, want [1 3 5 7 9]", got)
	}
	if notes := strings.Join(pan.Notes, " "); !strings.Contains(notes, "occasion 7 is not in the data") || !strings.Contains(notes, "equally spaced by 2") {
		t.Errorf("notes %q should say that occasion 7 was inserted", notes)
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

// TestOccasionSpacing: the grid follows the spacing of the occasion
// values (step = greatest common divisor of their differences), so a wave
// nobody was surveyed in is a missing occasion and 2019 -> 2021 is two
// lags; a grid that would be mostly empty is refused with the values.
func TestOccasionSpacing(t *testing.T) {
	sp := mustSpec(t, strings.Replace(spec2, `labels: ["no", "yes"]`, "categories: 2", 1))
	rows := func(occ ...int) string {
		var b strings.Builder
		b.WriteString("who,wave,mood,sick\n")
		for i, o := range occ {
			fmt.Fprintf(&b, "p%d,%d,%d,%d\n", i, o, 1+i%4, i%2)
		}
		return b.String()
	}
	for _, c := range []struct {
		name   string
		occ    []int
		grid   []int
		note   string
		refuse string
	}{
		{"years with 2020 skipped", []int{2017, 2018, 2019, 2021, 2022, 2017, 2018, 2019, 2021, 2022, 2017, 2019, 2021}, []int{2017, 2018, 2019, 2020, 2021, 2022}, "occasion 2020 is not in the data", ""},
		{"months by 6 with 18 missing", []int{0, 6, 12, 24, 0, 6, 12, 24, 0, 12, 24, 6}, []int{0, 6, 12, 18, 24}, "equally spaced by 6", ""},
		{"evenly spaced, nothing inserted", []int{10, 20, 30, 10, 20, 30, 10, 20, 30}, []int{10, 20, 30}, "", ""},
		{"one far-off value", []int{1, 2, 3, 1, 2, 3, 1, 2, 60}, nil, "", "(1, 2, 3, 60) are unevenly spaced: equal spacing needs a grid of 60 occasions"},
	} {
		t.Run(c.name, func(t *testing.T) {
			pan, err := ParsePanel(sp, "d.csv", []byte(rows(c.occ...)))
			if c.refuse != "" {
				if err == nil || !strings.Contains(err.Error(), c.refuse) || !strings.Contains(err.Error(), "recode") {
					t.Fatalf("err = %v, want it to contain %q and a hint to recode", err, c.refuse)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(pan.Occasions, c.grid) {
				t.Errorf("grid = %v, want %v", pan.Occasions, c.grid)
			}
			notes := strings.Join(pan.Notes, " ")
			if (c.note == "") != (notes == "") || !strings.Contains(notes, c.note) {
				t.Errorf("notes = %q, want %q", notes, c.note)
			}
		})
	}
	// Person a answered 2019 and 2021 on the grid 2017..2022: positions 2
	// and 4, two lags apart, with 2020 missing between them.
	pan, err := ParsePanel(sp, "d.csv", []byte("who,wave,mood,sick\na,2019,1,0\na,2021,2,1\nb,2017,3,0\nb,2018,4,1\nb,2022,1,0\n"))
	if err != nil {
		t.Fatal(err)
	}
	J := 2
	if v := pan.Y[pan.Offset[0]+2*J]; v != 0 {
		t.Errorf("a at 2019: %v, want category index 0 at grid position 2", v)
	}
	if v := pan.Y[pan.Offset[0]+3*J]; !math.IsNaN(v) {
		t.Errorf("a at 2020 (nobody surveyed): %v, want missing", v)
	}
	if v := pan.Y[pan.Offset[0]+4*J]; v != 1 {
		t.Errorf("a at 2021: %v, want category index 1 at grid position 4", v)
	}
}

func TestDisplayName(t *testing.T) {
	sp := mustSpec(t, strings.Replace(spec2, "{name: mood, type: ordinal", `{name: mood, display_name: "Mood (1-4)", type: ordinal`, 1))
	if sp.Outcomes[0].DisplayName != "Mood (1-4)" || sp.Outcomes[1].DisplayName != "" {
		t.Errorf("display names %q, %q", sp.Outcomes[0].DisplayName, sp.Outcomes[1].DisplayName)
	}
}

func TestPersonsSortedNumerically(t *testing.T) {
	sp := mustSpec(t, strings.Replace(spec2, `labels: ["no", "yes"]`, "categories: 2", 1))
	csv := "who,wave,mood,sick\n10,1,1,0\n9,1,2,1\n100,1,3,0\n9,2,4,0\n"
	pan, err := ParsePanel(sp, "d.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(pan.Persons, ","); got != "9,10,100" {
		t.Errorf("persons = %s, want 9,10,100", got)
	}
}

// TestEmptyCategories: an ordinal category nobody used is refused with a
// message naming the outcome, the categories and the way out; with
// empty_categories: merge it is dropped, the rest renumbered, and noted.
func TestEmptyCategories(t *testing.T) {
	const m = `data: {csv: d.csv, person: p, occasion: t}
outcomes: [{name: y, type: ordinal, categories: 5%s}]
dynamics: {lags: none}
`
	data := []byte("p,t,y\n1,1,1\n1,2,2\n2,1,4\n2,2,2\n3,1,1\n")
	_, err := ParsePanel(mustSpec(t, fmt.Sprintf(m, "")), "d.csv", data)
	if err == nil || !IsInputError(err) {
		t.Fatalf("got %v, want an input error", err)
	}
	for _, w := range []string{"d.csv", `outcome "y"`, "category 3, 5 never observed", "categories 1, 2, 3, 4, 5", "empty_categories: merge"} {
		if !strings.Contains(err.Error(), w) {
			t.Errorf("message lacks %q: %v", w, err)
		}
	}
	pan, err := ParsePanel(mustSpec(t, fmt.Sprintf(m, ", empty_categories: merge")), "d.csv", data)
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(pan.Outcomes[0].Codes, ","); got != "1,2,4" || pan.Outcomes[0].K != 3 {
		t.Errorf("codes after merging = %s (K %d), want 1,2,4", got, pan.Outcomes[0].K)
	}
	// Person 2 answered 4 then 2: now categories 2 and 1 (0-based).
	if got := pan.Y[pan.Offset[1] : pan.Offset[1]+2]; got[0] != 2 || got[1] != 1 {
		t.Errorf("person 2 = %v, want [2 1]", got)
	}
	if !strings.Contains(strings.Join(pan.Notes, " "), "category 3, 5 never observed and dropped") {
		t.Errorf("notes = %q, want a note on the dropped categories", pan.Notes)
	}
	// Merging down to two categories of an ordinal outcome is refused.
	_, err = ParsePanel(mustSpec(t, fmt.Sprintf(m, ", empty_categories: merge")), "d.csv", []byte("p,t,y\n1,1,1\n1,2,2\n"))
	if err == nil || !strings.Contains(err.Error(), "use type: binary") {
		t.Errorf("two categories left: got %v", err)
	}
}

// TestSingleValuedOutcome: an outcome that never varies is refused, for
// every type.
func TestSingleValuedOutcome(t *testing.T) {
	for _, c := range []struct{ typ, data string }{
		{"binary", "p,t,y\n1,1,1\n1,2,1\n2,1,1\n"},
		{"ordinal, categories: 3", "p,t,y\n1,1,2\n1,2,2\n2,1,NA\n"},
		{"continuous", "p,t,y\n1,1,3.5\n1,2,3.5\n2,1,3.5\n"},
	} {
		sp := mustSpec(t, "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: y, type: "+c.typ+"}]\ndynamics: {lags: none}\n")
		_, err := ParsePanel(sp, "d.csv", []byte(c.data))
		if err == nil || !IsInputError(err) || !strings.Contains(err.Error(), "never varies") || !strings.Contains(err.Error(), `outcome "y"`) {
			t.Errorf("%s: got %v, want a never-varies input error", c.typ, err)
		}
	}
}

func TestSpecDefaults(t *testing.T) {
	sp := mustSpec(t, "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}, {name: b, type: binary}]\n")
	if !sp.Between.RandomIntercepts || sp.Within.Lags != LagsCross || !sp.Within.ResidualCorrelation ||
		sp.Within.PathsFree || sp.Within.StationaryStart || !sp.Means.Free || sp.Sampler.Chains != 4 ||
		sp.Sampler.Warmup != 1000 || sp.Sampler.Draws != 1000 || sp.Sampler.SeedSet || sp.Sampler.ThresholdUpdate != ThresholdJoint {
		t.Errorf("defaults wrong: %+v", sp)
	}
	one := mustSpec(t, "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\ndynamics: {lags: own}\n")
	if one.Within.ResidualCorrelation {
		t.Error("one outcome: residual correlation should default to false")
	}
}

// TestSpecErrors checks that each model-file mistake is reported with its line.
func TestSpecErrors(t *testing.T) {
	cases := []struct{ text, want string }{
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binari}]\n", `m.yaml:2: outcome "a": type: expected one of ordinal, binary, continuous, got "binari" (did you mean "binary"?)`},
		{"data: {csv: d.csv, person: p}\noutcomes: [{name: a, type: binary}]\n", `data: missing key "occasion"`},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: ordinal, categories: 2}]\n", "an ordinal outcome needs 3 to 11 categories"},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nsampler: {chains: many}\n", `m.yaml:3: sampler.chains: expected a whole number from 1 to 64, got "many"`},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}, {name: a, type: binary}]\n", `"a" is listed twice`},
		{"data: [1, 2]\noutcomes: [{name: a, type: binary}]\n", "data: expected a set of keys"},
		{"data: {csv: d.csv\n", "not valid YAML"},
		{"", "model file is empty"},
		// Keys of earlier model files are not aliases; the message names the new key.
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nbetween: {random_intercepts: true}\n", `m.yaml:3: unknown key: "between" (this key is now called "person_differences")`},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nwithin: {lags: own}\n", `unknown key: "within" (this key is now called "dynamics")`},
		{"data: {file: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\n", `unknown key in data: "file" (this key is now called "csv")`},
		{"data: {csv: d.csv, person: p, occasion: t, missing: [NA]}\noutcomes: [{name: a, type: binary}]\n", `unknown key in data: "missing" (this key is now called "missing_codes")`},
		// Growth.
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nperson_differences: {random_intercepts: false, random_slopes: true}\n", "m.yaml:3: person_differences.random_slopes: true needs random_intercepts: true"},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nperson_differences: {random_slopes: true}\nmeans: {over_time: free}\n", "m.yaml:4: means: not used with person_differences.random_slopes: true"},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nperson_differences: {time_scores: [0, 1]}\n", "person_differences.time_scores: only used with person_differences.random_slopes: true"},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nperson_differences: {random_slopes: true, time_scores: yearly}\n", `person_differences.time_scores: expected one of equally_spaced, occasion_values, got "yearly"`},
		{"data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nperson_differences: {random_slopes: true, time_scores: [0, one, 2]}\n", `person_differences.time_scores: expected a number (at most 1e6 in size), got "one"`},
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
	base := "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\n"
	two := "p,t,a\n1,1,0\n1,2,1\n2,1,1\n2,2,0\n"
	three := "p,t,a\n1,1,0\n1,2,1\n1,3,1\n2,1,1\n2,2,0\n2,3,0\n"
	four := "p,t,a\n1,1,0\n1,2,1\n1,3,1\n1,4,0\n2,1,1\n2,2,0\n2,3,0\n2,4,1\n"
	cases := []struct {
		within, data, want string
	}{
		{"dynamics: {lags: own}", two, "needs at least three occasions"},
		{"dynamics: {lags: own}", three, ""},
		{"dynamics: {lags: own, over_time: free}", three, "need at least four occasions"},
		{"dynamics: {lags: own, over_time: free, first_occasion: stationary}", three, "stationary needs dynamics.over_time: equal"},
		{"dynamics: {lags: own, moving_average: true}", three, "with random intercepts needs at least four occasions (the data have 3)"},
		{"dynamics: {lags: own, moving_average: true}\nperson_differences: {random_intercepts: false}", three, ""},
		{"dynamics: {lags: own, moving_average: true}\nperson_differences: {random_intercepts: false}", two, "needs at least three occasions (the data have 2)"},
		{"dynamics: {lags: own, moving_average: true, first_occasion: stationary}\nperson_differences: {random_intercepts: false}", three, "moving_average: true needs dynamics.first_occasion: free"},
		{"dynamics: {lags: own, moving_average: true}\nperson_differences: {random_intercepts: false}\nsampler: {path_moves: true}", three, "path_moves: true is not available with dynamics.moving_average"},
		{"dynamics: {lags: none}\nperson_differences: {random_intercepts: true}", "p,t,a\n1,1,0\n2,1,1\n", "needs at least two occasions"},
		// Everyone answered once, at different occasions.
		{"dynamics: {lags: own}\nperson_differences: {random_intercepts: false}", "p,t,a\n1,1,0\n2,2,1\n3,3,1\n4,1,1\n", "nobody is"},
		{"dynamics: {lags: none}\nperson_differences: {random_intercepts: true}", "p,t,a\n1,1,0\n2,2,1\n3,3,1\n", "everyone was observed once"},
		// Two answers each, never at consecutive occasions.
		{"dynamics: {lags: own}\nperson_differences: {random_intercepts: false}", "p,t,a\n1,1,0\n1,3,1\n2,2,1\n2,4,0\n", "two consecutive occasions"},
		{"dynamics: {lags: none}\nperson_differences: {random_intercepts: true}", "p,t,a\n1,1,0\n1,3,1\n2,2,1\n2,4,0\n", ""},
		// Growth.
		{"dynamics: {lags: none}\nperson_differences: {random_slopes: true}", three, ""},
		{"dynamics: {lags: none}\nperson_differences: {random_slopes: true}", two, "random_slopes: true with dynamics.lags: none needs at least 3 occasions (the data have 2)"},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true}", three, "needs at least 4 occasions (the data have 3)"},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true}", four, ""},
		{"dynamics: {lags: own, over_time: free}\nperson_differences: {random_slopes: true}", four, "needs at least 5 occasions (the data have 4)"},
		{"dynamics: {lags: own, moving_average: true}\nperson_differences: {random_slopes: true}", four, "random_slopes: true is not available with dynamics.moving_average"},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true}\nsampler: {path_moves: true}", four, "path_moves: true is not available with person_differences.random_slopes"},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true, time_scores: [0, 1, 3]}", four, "time_scores: 3 scores given for 4 occasions"},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true, time_scores: [2, 2, 2, 2]}", four, "a slope needs scores that differ"},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true, time_scores: [0, 1, 3, 6]}", four, ""},
		{"dynamics: {lags: own}\nperson_differences: {random_slopes: true, time_scores: occasion_values}", four, ""},
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

const wideSpec = `data:
  csv: w.csv
  person: who
  layout: wide
outcomes:
  - {name: mood, type: ordinal, categories: 3, lowest: 1}
  - {name: sick, type: binary, labels: ["no", "yes"]}
dynamics: {lags: cross}
`

// TestWideEqualsLong: wide data (one row per person; columns found by
// the default pattern {outcome}_{occasion}, an outcome missing at one
// occasion, cells missing, a person with nothing observed) gives the same
// panel as the same values in long layout.
func TestWideEqualsLong(t *testing.T) {
	wide := "who,mood_1,mood_2,mood_4,sick_1,sick_4,age\n" +
		"bo,2,,3,yes,no,41\n" +
		"al,1,3,NA,no,,35\n" +
		"cy,,,,,,50\n" +
		"di,3,2,1,yes,yes,29\n"
	long := "who,wave,mood,sick\n" +
		"bo,1,2,yes\nbo,2,,\nbo,4,3,no\n" +
		"al,1,1,no\nal,2,3,\nal,4,NA,\n" +
		"di,1,3,yes\ndi,2,2,\ndi,4,1,yes\n"
	pw, err := ParsePanel(mustSpec(t, wideSpec), "w.csv", []byte(wide))
	if err != nil {
		t.Fatal(err)
	}
	pl, err := ParsePanel(mustSpec(t, spec2Long3), "l.csv", []byte(long))
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(pw.Persons, pl.Persons) || !slices.Equal(pw.Occasions, pl.Occasions) || !slices.Equal(pw.Len, pl.Len) {
		t.Fatalf("wide: persons %v occasions %v len %v; long: %v %v %v", pw.Persons, pw.Occasions, pw.Len, pl.Persons, pl.Occasions, pl.Len)
	}
	for c := range pl.Y {
		if a, b := pw.Y[c], pl.Y[c]; !(a == b || math.IsNaN(a) && math.IsNaN(b)) {
			t.Errorf("cell %d: wide %v, long %v", c, a, b)
		}
	}
	if pw.Rows != 4 {
		t.Errorf("rows = %d, want 4 (one per person)", pw.Rows)
	}
	if !strings.Contains(strings.Join(pw.Notes, " "), "cy") {
		t.Errorf("notes %q should mention the dropped person cy", pw.Notes)
	}
}

const spec2Long3 = `data: {csv: l.csv, person: who, occasion: wave}
outcomes:
  - {name: mood, type: ordinal, categories: 3, lowest: 1}
  - {name: sick, type: binary, labels: ["no", "yes"]}
dynamics: {lags: cross}
`

// TestWideColumnsMapped: an outcome's columns can be listed per occasion,
// and the pattern can be any text around {outcome} and {occasion}.
func TestWideColumnsMapped(t *testing.T) {
	sp := mustSpec(t, `data: {csv: w.csv, person: id, layout: wide, wide_columns: "wave{occasion}.{outcome}"}
outcomes:
  - {name: mood, type: ordinal, categories: 3, lowest: 1}
  - {name: sick, type: binary, columns: {1: ill_may, 3: ill_july}}
`)
	pan, err := ParsePanel(sp, "w.csv", []byte("id,wave1.mood,wave3.mood,ill_may,ill_july\n7,1,3,0,1\n8,2,2,1,0\n9,3,1,0,0\n"))
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(pan.Occasions, []int{1, 3}) || pan.Y[pan.Offset[0]+2+1] != 1 || pan.Y[pan.Offset[1]+0] != 1 {
		t.Errorf("occasions %v, cells %v", pan.Occasions, pan.Y)
	}
}

// TestWideBadInput: wide data gets the same kind of messages as long data
// (file, line, column, what was expected), and wide-only keys are checked.
func TestWideBadInput(t *testing.T) {
	for _, c := range []struct {
		name, spec, data string
		want             []string
	}{
		{"category out of range names the column", wideSpec, "who,mood_1,mood_2,sick_1\nbo,2,7,no\nal,1,2,yes\n",
			[]string{"w.csv:2:", `outcome "mood" (column "mood_2")`, "category 7 outside 1..3"}},
		{"label not declared", wideSpec, "who,mood_1,sick_1\nbo,2,no\nal,1,maybe\nx,3,yes\n",
			[]string{"w.csv:3:", `outcome "sick" (column "sick_1")`, `"maybe" is not one of the declared labels`}},
		{"person twice", wideSpec, "who,mood_1,sick_1\nbo,2,no\nbo,1,yes\n",
			[]string{"w.csv:3:", `person "bo" is also on line 2`, "one row per person"}},
		{"no column for an outcome", wideSpec, "who,mood_1,mood_2,ill_1\nbo,2,1,no\n",
			[]string{"w.csv:1:", `no column for outcome "sick"`, `"sick_1"`}},
		{"person column missing", wideSpec, "id,mood_1,sick_1\nbo,2,no\n",
			[]string{"w.csv:1:", `missing column "who"`}},
		{"mapped column missing", strings.Replace(wideSpec, `labels: ["no", "yes"]}`, `labels: ["no", "yes"], columns: {1: ill_a}}`, 1), "who,mood_1,ill_b\nbo,2,no\n",
			[]string{`missing column "ill_a"`, `outcome "sick", occasion 1`}},
		{"column fits two outcomes", `data: {csv: w.csv, person: who, layout: wide, wide_columns: "{outcome}{occasion}"}
outcomes: [{name: a, type: binary}, {name: a1, type: binary}]
`, "who,a1,a11,a12\nx,0,1,0\n", []string{`column "a11" fits the pattern`, `outcome "a"`, `outcome "a1"`}},
		{"row too short", wideSpec, "who,mood_1,sick_1\nbo,2\n", []string{"w.csv:2:", "expected 3 fields"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParsePanel(mustSpec(t, c.spec), "w.csv", []byte(c.data))
			if err == nil || !IsInputError(err) {
				t.Fatalf("got %v, want an input error", err)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("message lacks %q:\n%v", w, err)
				}
			}
		})
	}
	for _, c := range []struct{ name, spec, want string }{
		{"occasion with wide", strings.Replace(wideSpec, "layout: wide", "layout: wide\n  occasion: wave", 1), "data.occasion: not used with layout: wide"},
		{"pattern without occasion", strings.Replace(wideSpec, "layout: wide", "layout: wide\n  wide_columns: \"{outcome}_t\"", 1), "data.wide_columns: expected a column-name pattern"},
		{"pattern in long data", strings.Replace(spec2, "occasion: wave}", "occasion: wave, wide_columns: \"{outcome}{occasion}\"}", 1), "only used with layout: wide"},
		{"columns in long data", strings.Replace(spec2, `labels: ["no", "yes"]}`, `labels: ["no", "yes"], columns: {1: x}}`, 1), "columns is only used with data.layout: wide"},
		{"columns not a map", strings.Replace(wideSpec, `labels: ["no", "yes"]}`, `labels: ["no", "yes"], columns: [a, b]}`, 1), "expected occasion: column pairs"},
		{"occasion not a number", strings.Replace(wideSpec, `labels: ["no", "yes"]}`, `labels: ["no", "yes"], columns: {one: a}}`, 1), `occasion "one" is not a whole number`},
		{"bad layout", strings.Replace(wideSpec, "layout: wide", "layout: broad", 1), `data.layout: expected one of long, wide`},
	} {
		_, err := ParseSpec("m.yaml", []byte(c.spec))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: got %v, want %q", c.name, err, c.want)
		}
	}
}

// TestSpreadsheetCSV: files as spreadsheets save them. Semicolon- and
// tab-separated files are read (detected, or set by data.separator),
// empty trailing columns and rows of empty cells are skipped with a note,
// common missing-value texts get a hint, dates in the occasion column a
// message that says what to do, a CSV given as the model file a short
// message, and long data that is probably wide a hint at data.layout.
func TestSpreadsheetCSV(t *testing.T) {
	sp := mustSpec(t, strings.Replace(spec2, `labels: ["no", "yes"]`, "categories: 2", 1))
	good := "who,wave,mood,sick\na,1,1,0\na,2,2,1\nb,1,3,0\nb,2,4,1\n"
	for _, c := range []struct {
		name, csv string
		note      string
	}{
		{"semicolons", strings.ReplaceAll(good, ",", ";"), ""},
		{"tabs", strings.ReplaceAll(good, ",", "\t"), ""},
		{"trailing empty columns and rows", strings.ReplaceAll(good, "\n", ",,\n") + ",,,,,\n,,,,,\n", "2 empty columns without a name at the end of the header ignored"},
	} {
		pan, err := ParsePanel(sp, "d.csv", []byte(c.csv))
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if len(pan.Persons) != 2 || pan.T() != 2 {
			t.Errorf("%s: %d persons, %d occasions, want 2 and 2", c.name, len(pan.Persons), pan.T())
		}
		if notes := strings.Join(pan.Notes, " "); !strings.Contains(notes, c.note) || (c.note != "" && !strings.Contains(notes, "2 rows with every cell empty skipped")) {
			t.Errorf("%s: notes %q", c.name, notes)
		}
	}
	semi := mustSpec(t, strings.Replace(spec2, "occasion: wave}", "occasion: wave, separator: semicolon}", 1))
	if _, err := ParsePanel(semi, "d.csv", []byte("who;wave;mood;sick\na;1;1;no\na;2;2;yes\nb;1;3;no\nb;2;4;yes\n")); err != nil {
		t.Errorf("data.separator: semicolon: %v", err)
	}
	for _, c := range []struct{ name, csv, want string }{
		{"n/a code", strings.Replace(good, "a,2,2,1", "a,2,n/a,1", 1), `if "n/a" means a missing answer, add it to data.missing_codes`},
		{"dot code", strings.Replace(good, "a,2,2,1", "a,2,.,1", 1), `if "." means a missing answer`},
		{"date occasions", strings.Replace(good, "a,1,", "a,2024-03-01,", 1), "looks like a date or time: recode it as a whole number of days"},
		{"wide data read as long", "who,mood_1,mood_2,sick_1,sick_2\na,1,2,0,1\n", "set data.layout: wide"},
	} {
		_, err := ParsePanel(sp, "d.csv", []byte(c.csv))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: err = %v, want %q", c.name, err, c.want)
		}
	}
	cont := mustSpec(t, "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: y, type: continuous}]\n")
	pan, err := ParsePanel(cont, "d.csv", []byte("p,t,y\na,1,2.5\na,2,-99\nb,1,3.1\nb,2,-99\n"))
	if err != nil || !strings.Contains(strings.Join(pan.Notes, " "), "2 cells hold -99, a common missing-value code") {
		t.Errorf("-99 in a continuous outcome should be noted (err %v, notes %v)", err, pan.Notes)
	}
	// A model file whose first lines are comments with commas is still YAML.
	if _, err := ParseSpec("m.yaml", []byte("# mood, pain, sleep\n# by A, B, C\n"+spec2)); err != nil {
		t.Errorf("a model file opening with comments: %v", err)
	}
	_, err = ParseSpec("d.csv", []byte(good))
	if err == nil || !strings.Contains(err.Error(), "is a data file, not a model file") || strings.Contains(err.Error(), "b,2,4,1") {
		t.Errorf("a CSV as model file: %v", err)
	}
}

// TestWideDidYouMean: a wide file whose columns misspell an outcome gets
// the outcome name its columns carry as a suggestion.
func TestWideDidYouMean(t *testing.T) {
	sp := mustSpec(t, "data: {csv: w.csv, person: id, layout: wide}\noutcomes: [{name: mood, type: ordinal, categories: 3, lowest: 1}, {name: sick, type: binary}]\n")
	_, err := ParsePanel(sp, "w.csv", []byte("id,moood_1,moood_2,sick_1,sick_2\na,1,2,0,1\nb,3,1,1,0\n"))
	if err == nil || !strings.Contains(err.Error(), `no column for outcome "mood"`) || !strings.Contains(err.Error(), `did you mean "moood"`) {
		t.Errorf("err = %v, want a suggestion of \"moood\"", err)
	}
}

// TestSamplerRunLengthKeys: sampling until converged is the default;
// until_converged: false turns it off; time_limit reads a duration and
// refuses anything else naming the key.
func TestSamplerRunLengthKeys(t *testing.T) {
	base := "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: y, type: binary}]\n"
	sp, err := ParseSpec("m.yaml", []byte(base))
	if err != nil || !sp.Sampler.UntilConverged || sp.Sampler.TimeLimit != 0 {
		t.Fatalf("defaults: %+v, %v; want until converged, no time limit", sp.Sampler, err)
	}
	sp, err = ParseSpec("m.yaml", []byte(base+"sampler: {until_converged: false, time_limit: 90m}\n"))
	if err != nil || sp.Sampler.UntilConverged || sp.Sampler.TimeLimit != 90*time.Minute {
		t.Fatalf("set: %+v, %v", sp.Sampler, err)
	}
	for _, bad := range []string{"soon", "-5m", "0s", "[1]"} {
		if _, err := ParseSpec("m.yaml", []byte(base+"sampler: {time_limit: "+bad+"}\n")); err == nil || !strings.Contains(err.Error(), "sampler.time_limit") {
			t.Errorf("time_limit %s: %v, want an error naming sampler.time_limit", bad, err)
		}
	}
}

// TestPersonOrderTotal: ids that are one number written differently (1
// and 01, 4 and +4, 0 and -0) are different persons in one total order,
// whatever the order of the rows, and the summary notes them.
func TestPersonOrderTotal(t *testing.T) {
	sp, err := ParseSpec("m.yaml", []byte("data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: y, type: binary}]\n"))
	if err != nil {
		t.Fatal(err)
	}
	rows := []string{"01,1,0", "1,1,1", "+4,1,0", "4,1,1", "0,1,1", "-0,1,0", "01,2,1", "1,2,0", "+4,2,1", "4,2,0", "0,2,0", "-0,2,1"}
	var orders [][]string
	for _, rev := range []bool{false, true} {
		rs := slices.Clone(rows)
		if rev {
			slices.Reverse(rs)
		}
		pan, err := ParsePanel(sp, "d.csv", []byte("p,t,y\n"+strings.Join(rs, "\n")+"\n"))
		if err != nil {
			t.Fatal(err)
		}
		orders = append(orders, pan.Persons)
		if !strings.Contains(strings.Join(pan.Notes, "\n"), "the same number written differently") {
			t.Errorf("no note on ids that are one number: %v", pan.Notes)
		}
	}
	want := []string{"-0", "0", "01", "1", "+4", "4"}
	for _, o := range orders {
		if !slices.Equal(o, want) {
			t.Errorf("person order %v, want %v", o, want)
		}
	}
}

// TestHugeContinuousValueRefused: a finite value too large to standardize
// (the -1.797e308 some programs write for missing) is refused naming the
// row and pointing at missing codes, not left to fail in the sampler.
func TestHugeContinuousValueRefused(t *testing.T) {
	sp, err := ParseSpec("m.yaml", []byte("data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: steps, type: continuous}]\n"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = ParsePanel(sp, "d.csv", []byte("p,t,steps\n1,1,3.5\n1,2,-1.797e308\n2,1,4\n2,2,5\n"))
	if err == nil || !strings.Contains(err.Error(), "d.csv:3") || !strings.Contains(err.Error(), "missing_codes") {
		t.Errorf("got %v, want a refusal naming d.csv:3 and data.missing_codes", err)
	}
}

// TestLatentLagRules: dynamics.lag_on: latent_response is refused, with
// the key and the reason, where it does not apply, and needs the
// occasions identifyLatentLag says.
func TestLatentLagRules(t *testing.T) {
	base := "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\n"
	for _, c := range []struct{ text, want string }{
		{"dynamics: {lags: none, lag_on: latent_response}", "needs dynamics.lags: own or cross"},
		{"dynamics: {lags: own, lag_on: latent_response, moving_average: true}", "cannot be combined with dynamics.moving_average"},
		{"dynamics: {lags: own, lag_on: latent_response, first_occasion: stationary}", "first_occasion: stationary does not apply"},
		{"dynamics: {lags: own, lag_on: latent_response}\nperson_differences: {random_slopes: true}", "cannot be combined with person_differences.random_slopes"},
		{"dynamics: {lags: own, lag_on: latent_response}\nsampler: {path_moves: true}", "cannot be combined with sampler.path_moves"},
		{"dynamics: {lags: own, lag_on: latent_response}\nmeans: {anchor: 3}", "means.anchor: 3 does not apply"},
		{"dynamics: {lags: own, lag_on: observed}", "dynamics.lag_on: expected one of residuals, latent_response"},
	} {
		_, err := ParseSpec("m.yaml", []byte(base+c.text+"\n"))
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "m.yaml") {
			t.Errorf("%s: error = %v, want %q naming the file", c.text, err, c.want)
		}
	}
	cont := "data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: continuous}]\ndynamics: {lags: own, lag_on: latent_response, over_time: free}\nmeans: {over_time: equal}\n"
	if _, err := ParseSpec("m.yaml", []byte(cont)); err == nil || !strings.Contains(err.Error(), "use means.over_time: free") {
		t.Errorf("continuous, paths free, intercepts equal: error = %v", err)
	}
	rows := func(T int, skipFirst bool) string {
		var b strings.Builder
		b.WriteString("p,t,a\n")
		for p := 1; p <= 2; p++ {
			for s := 1; s <= T; s++ {
				v := fmt.Sprint((p + s) % 2)
				if skipFirst && s == 1 {
					v = "NA"
				}
				fmt.Fprintf(&b, "%d,%d,%s\n", p, s, v)
			}
		}
		return b.String()
	}
	for _, c := range []struct {
		dyn  string
		data string
		want string
	}{
		{"{lags: own, lag_on: latent_response}", rows(3, false), "with random intercepts needs at least 4 occasions (the data have 3)"},
		{"{lags: own, lag_on: latent_response}", rows(4, false), ""},
		{"{lags: own, lag_on: latent_response, over_time: free}", rows(4, false), "needs at least 5 occasions (the data have 4)"},
		{"{lags: own, lag_on: latent_response, over_time: free}", rows(5, false), ""},
		{"{lags: own, lag_on: latent_response}", rows(5, true), "takes the first occasion (1) as given, but nobody answered outcome \"a\" there"},
	} {
		sp := mustSpec(t, base+"dynamics: "+c.dyn+"\n")
		pan, err := ParsePanel(sp, "d.csv", []byte(c.data))
		if err != nil {
			t.Fatal(err)
		}
		err = Identify(sp, pan)
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: unexpected refusal: %v", c.dyn, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("%s: error = %v, want %q", c.dyn, err, c.want)
		}
	}
	noRI := mustSpec(t, base+"dynamics: {lags: own, lag_on: latent_response}\nperson_differences: {random_intercepts: false}\n")
	pan, err := ParsePanel(noRI, "d.csv", []byte(rows(2, false)))
	if err != nil {
		t.Fatal(err)
	}
	if err := Identify(noRI, pan); err != nil {
		t.Errorf("without random intercepts two occasions suffice: %v", err)
	}
}
