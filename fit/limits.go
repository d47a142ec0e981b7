package fit

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
)

// The ranges of every size a user can give (flags and model-file keys
// share them; README, "Limits").
const (
	MaxChains      = 64
	MaxDraws       = 10_000_000 // draws, warm-up and max-draws per chain
	MaxCheckDraws  = 100_000    // check --draws, compare --draws
	MaxGHKPoints   = 100_000
	MaxSimPersons  = 10_000_000
	MaxSimOccasion = 100_000
	// MaxSimCells caps persons x occasions x outcomes of simulate (about
	// 10 bytes of CSV each).
	MaxSimCells = 200_000_000
)

// checkRange returns an InputError naming flag unless lo <= v <= hi.
func checkRange(flag string, v, lo, hi int) error {
	if v < lo || v > hi {
		return model.Inputf("", 0, "%s: expected a whole number from %d to %d, got %d", flag, lo, hi, v)
	}
	return nil
}

// mul multiplies sizes in floating point, where they cannot overflow.
func mul(xs ...int) float64 {
	p := 1.0
	for _, x := range xs {
		p *= float64(x)
	}
	return p
}

// fitMemory estimates the bytes a fit keeps at its largest: every chain's
// kept draws (parameters and derived quantities, 8 bytes each) at the
// most draws it can reach, its state (latent responses, data, per-shard
// scratch) and one checkpoint being encoded.
func fitMemory(l *sampler.Layout, chains, draws int) float64 {
	np, nd := len(l.Params()), len(l.DerivedParams())
	cells := len(l.Panel.Y)
	perChain := mul(draws, np+nd, 8) + mul(cells, 8, 4) + mul(l.N, l.J, 8, 4) + mul(l.MaxLen, l.J, l.J, 8, 64)
	if l.MA {
		// The ARMA latent block keeps, per start occasion, how a change
		// moves every later innovation, and Sigma^{-1} times it: two
		// triangles of about T^2 J^2 / 2 values each.
		perChain += mul(l.T, l.T, l.J, l.J, 8)
	}
	checkpoint := mul(draws, np+nd, 8) + mul(cells, 8)
	return mul(chains)*perChain + checkpoint + mul(len(l.Panel.Raw), 2)
}

// MemoryCap is the most memory a run may plan to use: cap bytes when
// given (> 0), else 80% of the machine's memory (/proc/meminfo), else 16
// GiB when that cannot be read.
func MemoryCap(cap int64) float64 {
	if cap > 0 {
		return float64(cap)
	}
	if total := machineMemory(); total > 0 {
		return 0.8 * total
	}
	return 16 * (1 << 30)
}

func machineMemory() float64 {
	f, err := os.Open("/proc/meminfo")
	if err != nil {
		return 0
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		fs := strings.Fields(sc.Text())
		if len(fs) >= 2 && fs[0] == "MemTotal:" {
			kb, err := strconv.ParseFloat(fs[1], 64)
			if err == nil {
				return kb * 1024
			}
		}
	}
	return 0
}

// Bytes renders a byte count for messages ("1.5 GB").
func Bytes(b float64) string {
	switch {
	case b >= 1e12:
		return fmt.Sprintf("%.1f TB", b/1e12)
	case b >= 1e9:
		return fmt.Sprintf("%.1f GB", b/1e9)
	case b >= 1e6:
		return fmt.Sprintf("%.0f MB", b/1e6)
	}
	return fmt.Sprintf("%.0f kB", math.Max(b/1e3, 1))
}

// ParseBytes reads a size such as 500MB, 8GB or 2GiB (a plain number is
// bytes).
func ParseBytes(s string) (int64, error) {
	t := strings.ToUpper(strings.TrimSpace(s))
	mult := 1.0
	for _, u := range []struct {
		suffix string
		m      float64
	}{{"TIB", 1 << 40}, {"GIB", 1 << 30}, {"MIB", 1 << 20}, {"KIB", 1 << 10}, {"TB", 1e12}, {"GB", 1e9}, {"MB", 1e6}, {"KB", 1e3}, {"B", 1}} {
		if strings.HasSuffix(t, u.suffix) {
			t, mult = strings.TrimSpace(strings.TrimSuffix(t, u.suffix)), u.m
			break
		}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || !(v > 0) || v*mult > 1<<62 {
		return 0, fmt.Errorf("expected a size such as 500MB or 8GB, got %q", s)
	}
	return int64(v * mult), nil
}
