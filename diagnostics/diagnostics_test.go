package diagnostics

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strconv"
	"testing"
)

// readChains reads testdata/<name>.csv (chain,iteration,value).
func readChains(t *testing.T, name string) [][]float64 {
	t.Helper()
	f, err := os.Open("testdata/" + name + ".csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	chains := make([][]float64, 4)
	for _, r := range recs[1:] {
		c, _ := strconv.Atoi(r[0])
		v, _ := strconv.ParseFloat(r[2], 64)
		chains[c-1] = append(chains[c-1], v)
	}
	return chains
}

// TestAgainstPosteriorPackage checks R-hat, bulk-ESS, tail-ESS, ESS of the
// mean and MCSE of the mean against the values of R's posterior 1.4.0
// (Vehtari et al. 2021) stored in testdata/diagnostics_reference.json.
func TestAgainstPosteriorPackage(t *testing.T) {
	raw, err := os.ReadFile("testdata/diagnostics_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Scenarios map[string]struct {
			R map[string]float64 `json:"posterior_R"`
		} `json:"scenarios"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	const relTol = 1e-8
	for _, name := range []string{"ar1_phi0.9", "iid_normal", "iid_normal_chain4_shift0.5", "iid_cauchy"} {
		t.Run(name, func(t *testing.T) {
			ch := readChains(t, name)
			want := ref.Scenarios[name].R
			got := map[string]float64{
				"posterior_rhat":             Rhat(ch),
				"posterior_ess_bulk":         ESSBulk(ch),
				"posterior_ess_tail":         ESSTail(ch),
				"posterior_ess_q05":          ESSQuantile(ch, 0.05),
				"posterior_ess_q95":          ESSQuantile(ch, 0.95),
				"posterior_rhat_basic_split": RhatBasic(Split(ch)),
				"posterior_ess_basic_split":  ESSMean(ch),
				"posterior_mcse_mean":        MCSEMean(ch),
			}
			for k, g := range got {
				w, ok := want[k]
				if !ok {
					t.Fatalf("reference lacks %s", k)
				}
				if math.Abs(g-w) > relTol*math.Abs(w) {
					t.Errorf("%s = %.12g, want %.12g (posterior 1.4.0) within relative %g", k, g, w, relTol)
				}
			}
		})
	}
}

// TestMCSEQuantileIID checks the quantile MCSE against the asymptotic
// sqrt(p(1-p)/n)/f(q) for iid normal draws (large-sample theory,
// e.g. Serfling 1980, §2.3.3).
func TestMCSEQuantileIID(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	ch := make([][]float64, 4)
	for c := range ch {
		ch[c] = make([]float64, 5000)
		for i := range ch[c] {
			ch[c][i] = rng.NormFloat64()
		}
	}
	p := 0.05
	q := -1.6448536269514722
	dens := math.Exp(-q*q/2) / math.Sqrt(2*math.Pi)
	want := math.Sqrt(p*(1-p)/20000) / dens
	got := MCSEQuantile(ch, p)
	if math.Abs(got-want) > 0.15*want {
		t.Errorf("MCSEQuantile(0.05) = %.4g, want %.4g within 15%%", got, want)
	}
}

func TestConstantChains(t *testing.T) {
	ch := [][]float64{{1, 1, 1, 1, 1}, {1, 1, 1, 1, 1}}
	s := Summarize(ch, 0.95)
	if !math.IsNaN(s.Rhat) || !math.IsNaN(s.ESSBulk) {
		t.Errorf("constant chains: Rhat %v ESS %v, want NaN for both", s.Rhat, s.ESSBulk)
	}
}

func ExampleSummarize() {
	rng := rand.New(rand.NewPCG(1, 2))
	ch := make([][]float64, 4)
	for c := range ch {
		ch[c] = make([]float64, 1000)
		for i := range ch[c] {
			ch[c][i] = 2 + rng.NormFloat64()
		}
	}
	s := Summarize(ch, 0.9)
	fmt.Printf("mean %.1f, R-hat below 1.01: %v, bulk-ESS above 3000: %v\n", s.Mean, s.Rhat < 1.01, s.ESSBulk > 3000)
	// Output: mean 2.0, R-hat below 1.01: true, bulk-ESS above 3000: true
}

// TestSummarizeMatchesParts: the shared-work Summarize must give exactly
// the values of the separate functions.
func TestSummarizeMatchesParts(t *testing.T) {
	for _, name := range []string{"ar1_phi0.9", "iid_normal_chain4_shift0.5"} {
		ch := readChains(t, name)
		level := 0.9
		s := Summarize(ch, level)
		lp, up := (1-level)/2, 1-(1-level)/2 // as Summarize computes them (not as exact constants)
		checks := []struct {
			what      string
			got, want float64
		}{
			{"rhat", s.Rhat, Rhat(ch)}, {"ess_bulk", s.ESSBulk, ESSBulk(ch)}, {"ess_tail", s.ESSTail, ESSTail(ch)},
			{"mcse_mean", s.MCSEMean, MCSEMean(ch)}, {"mcse_lower", s.MCSELower, MCSEQuantile(ch, lp)},
			{"mcse_upper", s.MCSEUpper, MCSEQuantile(ch, up)}, {"lower", s.Lower, Quantile(pool(ch), lp)},
			{"upper", s.Upper, Quantile(pool(ch), up)},
		}
		for _, c := range checks {
			if c.got != c.want {
				t.Errorf("%s: Summarize %s = %v, separate function = %v", name, c.what, c.got, c.want)
			}
		}
	}
}
