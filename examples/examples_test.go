package examples

import (
	"bytes"
	"encoding/csv"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
)

var update = flag.Bool("update", false, "rewrite the generated example data")

// sleepTruth is the invented truth behind the sleep diary (latent scale).
var sleepTruth = sampler.Truth{
	Names: []string{"rested", "headache"},
	Types: []model.OutcomeType{model.Ordinal, model.Binary},
	Tau:   [][]float64{{-1.3, -0.45, 0.4, 1.25}, {0.9}},
	Psi:   []float64{0.6, -0.2, -0.2, 0.5},
	A:     []float64{0.35, -0.10, -0.15, 0.25},
	Sigma: []float64{1, -0.25, -0.25, 1},
}

func generateSleepDiary() []byte {
	rng := rand.New(rand.NewPCG(2026, 12))
	raw, err := sampler.Simulate(sleepTruth, 120, 42, rng)
	if err != nil {
		panic(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		panic(err)
	}
	out := [][]string{{"nurse", "day", "rested", "headache"}}
	stop := map[string]int{}
	for _, r := range recs[1:] {
		id := r[0]
		if _, ok := stop[id]; !ok {
			stop[id] = 42
			if rng.Float64() < 0.15 {
				stop[id] = 20 + rng.IntN(22) // stopped early
			}
		}
		var day int
		fmt.Sscan(r[1], &day)
		if day > stop[id] || rng.Float64() < 0.06 { // skipped day
			continue
		}
		rested, head := r[2], r[3]
		if rng.Float64() < 0.04 {
			rested = ""
		} else {
			var k int
			fmt.Sscan(rested, &k)
			rested = fmt.Sprint(k + 1)
		}
		switch {
		case rng.Float64() < 0.04:
			head = "NA"
		case head == "1":
			head = "yes"
		default:
			head = "no"
		}
		var n int
		fmt.Sscan(id, &n)
		out = append(out, []string{fmt.Sprintf("N%03d", n), r[1], rested, head})
	}
	body := out[1:]
	rng.Shuffle(len(body), func(i, j int) { body[i], body[j] = body[j], body[i] })
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.WriteAll(out)
	return buf.Bytes()
}

// TestGenerateSleepDiary keeps the embedded data equal to its generator;
// run with -update to rewrite it.
func TestGenerateSleepDiary(t *testing.T) {
	got := generateSleepDiary()
	if *update {
		if err := os.WriteFile("sleepdiary/diary.csv", got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	_, want := SleepDiary()
	if !bytes.Equal(got, want) {
		t.Fatalf("sleepdiary/diary.csv differs from its generator; run go test ./examples -update")
	}
}
