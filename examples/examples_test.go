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
	_, want := SleepDiary()
	sameAsGenerated(t, "sleepdiary/diary.csv", generateSleepDiary(), want)
}

// sameAsGenerated fails unless the embedded file equals what its generator
// gives; with -update it rewrites the file first.
func sameAsGenerated(t *testing.T, path string, got, want []byte) {
	t.Helper()
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	if !bytes.Equal(got, want) {
		t.Fatalf("%s differs from its generator; run go test ./examples -update", path)
	}
}

// wristTruth is the invented truth behind the wrist-pain panel: workload
// carries over to next year's pain (0.15) more than pain to workload.
var wristTruth = sampler.Truth{
	Names: []string{"pain", "workload"},
	Types: []model.OutcomeType{model.Binary, model.Ordinal},
	Tau:   [][]float64{{0.8}, {-0.9, 0.1, 1.0}},
	Psi:   []float64{0.7, 0.25, 0.25, 0.5},
	A:     []float64{0.3, 0.15, 0.05, 0.4},
	Sigma: []float64{1, 0.2, 0.2, 1},
}

func generateWristPain() []byte {
	rng := rand.New(rand.NewPCG(2019, 2024))
	raw, err := sampler.Simulate(wristTruth, 300, 6, rng)
	if err != nil {
		panic(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		panic(err)
	}
	head := []string{"employee"}
	for y := 2019; y <= 2024; y++ {
		head = append(head, fmt.Sprintf("pain_%d", y))
	}
	for y := 2019; y <= 2024; y++ {
		head = append(head, fmt.Sprintf("workload_%d", y))
	}
	rows := map[int][]string{}
	left := map[int]int{}
	var ids []int
	for _, r := range recs[1:] {
		var id, t int
		fmt.Sscan(r[0], &id)
		fmt.Sscan(r[1], &t)
		if rows[id] == nil {
			rows[id] = make([]string, 13)
			rows[id][0] = fmt.Sprintf("B%04d", 1000+id)
			ids = append(ids, id)
			left[id] = 7
			if rng.Float64() < 0.2 {
				left[id] = 3 + rng.IntN(4) // left the company after year 2..5
			}
		}
		pain, load := "", ""
		if t < left[id] {
			if rng.Float64() >= 0.04 {
				pain = map[string]string{"0": "no", "1": "yes"}[r[2]]
			}
			if rng.Float64() >= 0.04 {
				var k int
				fmt.Sscan(r[3], &k)
				load = fmt.Sprint(k + 1)
			}
		}
		rows[id][t] = pain
		rows[id][6+t] = load
	}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write(head)
	for _, id := range ids {
		w.Write(rows[id])
	}
	w.Flush()
	return buf.Bytes()
}

// TestGenerateWristPain keeps the embedded data equal to its generator;
// run with -update to rewrite it.
func TestGenerateWristPain(t *testing.T) {
	_, want := WristPain()
	sameAsGenerated(t, "wristpain/staff.csv", generateWristPain(), want)
}
