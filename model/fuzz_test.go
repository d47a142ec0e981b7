package model

import (
	"bytes"
	"encoding/csv"
	"math"
	"strconv"
	"strings"
	"testing"
)

// FuzzParseSpec: the model-file parser never panics, and every error it
// returns is an InputError (exit status 2, never an internal failure).
func FuzzParseSpec(f *testing.F) {
	f.Add([]byte(spec2))
	f.Add([]byte("data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: a, type: binary}]\nsampler: {seed: 3, chains: 2}\n"))
	f.Add([]byte("outcomes:\n  - name: y\n    type: ordinal\n    labels: [lo, mid, hi]\n"))
	f.Add([]byte("data: [\n"))
	f.Fuzz(func(t *testing.T, raw []byte) {
		sp, err := ParseSpec("fuzz.yaml", raw)
		if err != nil {
			if !IsInputError(err) {
				t.Fatalf("error %v is not an InputError", err)
			}
			return
		}
		if len(sp.Outcomes) == 0 {
			t.Fatal("a spec without outcomes was accepted")
		}
	})
}

// FuzzParsePanel: the CSV loader never panics; errors are InputErrors;
// an accepted panel is consistent (cells in range), and writing its cells
// back as CSV and parsing again gives the same panel (round trip).
func FuzzParsePanel(f *testing.F) {
	f.Add([]byte("who,wave,mood,sick\nbo,5,2,no\nal,1,1,yes\nal,5,4,NA\nbo,1,3,\n"))
	f.Add([]byte("who,wave,mood,sick\n1,1,1,no\n1,2,7,yes\n"))
	f.Add([]byte("who,wave,mood,sick\n\"a,b\",1,1,no\n"))
	f.Add([]byte("\xef\xbb\xbfwho,wave,mood,sick\nx,2.0,3,yes\n"))
	// Empty categories are merged, so that panels with unused categories
	// are accepted and the merge takes part in the round trip.
	sp, err := ParseSpec("m.yaml", []byte(strings.Replace(spec2, "lowest: 1}", "lowest: 1, empty_categories: merge}", 1)))
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, raw []byte) { fuzzPanel(t, sp, raw, writePanel) })
}

// FuzzParseWidePanel: the same for wide data: no panics, input errors
// only, consistent panels, and a panel written back in wide layout reads
// back the same.
func FuzzParseWidePanel(f *testing.F) {
	f.Add([]byte("who,mood_1,mood_2,mood_4,sick_1,sick_4,age\nbo,2,,3,yes,no,41\nal,1,3,NA,no,,35\ncy,,,,,,50\n"))
	f.Add([]byte("who,mood_1,sick_1\nbo,2,no\nbo,1,yes\n"))
	f.Add([]byte("who,mood_-3,mood_0,sick_0,sick_x\n\"a,b\",1,3,yes,no\n"))
	f.Add([]byte("\xef\xbb\xbfwho,mood_10,sick_10,mood_2,sick_2\n1,3,yes,2,no\n2,1,no,3,yes\n"))
	sp, err := ParseSpec("m.yaml", []byte(strings.Replace(wideSpec, "lowest: 1}", "lowest: 1, empty_categories: merge}", 1)))
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, raw []byte) { fuzzPanel(t, sp, raw, writeWide) })
}

// fuzzPanel parses raw; an error must be an InputError; an accepted panel
// must have its cells in range and read back the same after write.
func fuzzPanel(t *testing.T, sp *Spec, raw []byte, write func(*Panel, *Spec) []byte) {
	pan, err := ParsePanel(sp, "fuzz.csv", raw)
	if err != nil {
		if !IsInputError(err) {
			t.Fatalf("error %v is not an InputError", err)
		}
		return
	}
	checkCells(t, pan)
	again, err := ParsePanel(sp, "again.csv", write(pan, sp))
	if err != nil {
		t.Fatalf("re-reading the written panel: %v", err)
	}
	samePanel(t, pan, again)
}

// checkCells fails when a category cell is outside its outcome's range.
func checkCells(t *testing.T, pan *Panel) {
	J := pan.J()
	for c, v := range pan.Y {
		if math.IsNaN(v) {
			continue
		}
		if o := pan.Outcomes[c%J]; o.K > 0 && (v < 0 || int(v) >= o.K || v != math.Trunc(v)) {
			t.Fatalf("cell %d = %v outside 0..%d", c, v, o.K-1)
		}
	}
}

// samePanel fails unless again holds the persons and cells of pan.
func samePanel(t *testing.T, pan, again *Panel) {
	t.Helper()
	J := pan.J()
	if len(again.Persons) != len(pan.Persons) || len(again.Y) != len(pan.Y) {
		t.Fatalf("round trip changed the panel: %d persons/%d cells, then %d/%d", len(pan.Persons), len(pan.Y), len(again.Persons), len(again.Y))
	}
	// Compare person by person: the order of persons may differ (ids are
	// sorted numerically only when every id in the file is a number, and
	// persons without data are not written back).
	pos := map[string]int{}
	for i, id := range again.Persons {
		pos[id] = i
	}
	for i, id := range pan.Persons {
		k, ok := pos[id]
		if !ok || again.Len[k] != pan.Len[i] {
			t.Fatalf("round trip lost or changed person %q", id)
		}
		for c := 0; c < pan.Len[i]*J; c++ {
			a, b := pan.Y[pan.Offset[i]+c], again.Y[again.Offset[k]+c]
			if !(a == b || math.IsNaN(a) && math.IsNaN(b)) {
				t.Fatalf("round trip changed person %q cell %d: %v then %v", id, c, a, b)
			}
		}
	}
}

// writeWide writes a panel back in wide layout, columns named by the
// spec's pattern (the writer of the wide round trip).
func writeWide(pan *Panel, sp *Spec) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	head := []string{sp.Data.Person}
	J := pan.J()
	for _, occ := range pan.Occasions {
		for _, o := range sp.Outcomes {
			head = append(head, strings.NewReplacer("{outcome}", o.Name, "{occasion}", strconv.Itoa(occ)).Replace(sp.Data.WideColumns))
		}
	}
	w.Write(head)
	for i, id := range pan.Persons {
		rec := []string{id}
		for t := range pan.Occasions {
			for j, o := range pan.Outcomes {
				v := math.NaN()
				if t < pan.Len[i] {
					v = pan.Y[pan.Offset[i]+t*J+j]
				}
				rec = append(rec, cellText(o, v))
			}
		}
		w.Write(rec)
	}
	w.Flush()
	return b.Bytes()
}

// writePanel writes a panel's observed cells back as long CSV with the
// spec's column names (the writer of the round trip).
func writePanel(pan *Panel, sp *Spec) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	head := []string{sp.Data.Person, sp.Data.Occasion}
	for _, o := range sp.Outcomes {
		head = append(head, o.Name)
	}
	w.Write(head)
	J := pan.J()
	for i, id := range pan.Persons {
		for t := 0; t < pan.Len[i]; t++ {
			rec := []string{id, strconv.Itoa(pan.Occasions[t])}
			for j, o := range pan.Outcomes {
				rec = append(rec, cellText(o, pan.Y[pan.Offset[i]+t*J+j]))
			}
			w.Write(rec)
		}
	}
	w.Flush()
	return b.Bytes()
}

// cellText writes a cell as the loader reads it: NA, a category code or a
// number.
func cellText(o Outcome, v float64) string {
	switch {
	case math.IsNaN(v):
		return "NA"
	case o.K > 0:
		return o.Codes[int(v)]
	default:
		return strconv.FormatFloat(v, 'g', -1, 64)
	}
}
