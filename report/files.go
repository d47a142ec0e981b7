package report

import (
	"bytes"
	"encoding/csv"
	"github.com/lagstar/lagstar/catalog"
	"strconv"

	"github.com/lagstar/lagstar/sampler"
)

// DrawsCSV renders the kept draws: columns chain, draw, then one per
// parameter and per tabled derived quantity (standardized paths, ICC).
func DrawsCSV(res *sampler.Result) ([]byte, error) {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	head := []string{"chain", "draw"}
	var dIdx []int
	for _, p := range res.Params {
		head = append(head, p.Name)
	}
	for i, p := range res.Derived {
		if catalog.Tabled(p.Kind) {
			head = append(head, p.Name)
			dIdx = append(dIdx, i)
		}
	}
	if err := w.Write(head); err != nil {
		return nil, err
	}
	np, nd := len(res.Params), len(res.Derived)
	rec := make([]string, len(head))
	for c := range res.Draws {
		for d := 0; d < res.Kept[c]; d++ {
			rec = rec[:0]
			rec = append(rec, strconv.Itoa(c+1), strconv.Itoa(d+1))
			for p := 0; p < np; p++ {
				rec = append(rec, strconv.FormatFloat(res.Draws[c][d*np+p], 'g', -1, 64))
			}
			for _, i := range dIdx {
				rec = append(rec, strconv.FormatFloat(res.DerivedDraws[c][d*nd+i], 'g', -1, 64))
			}
			if err := w.Write(rec); err != nil {
				return nil, err
			}
		}
	}
	w.Flush()
	return buf.Bytes(), w.Error()
}
