package stats

import (
	"fmt"
	"math"
)

// Kappa is Cohen's chance-corrected agreement between two raters who sorted
// the same items into the same k categories (Cohen J. Educ Psychol Meas
// 1960;20:37-46). Here the raters are the recorder's automatic interpretation
// and the clinician's over-read.
type Kappa struct {
	N     int     // items rated by both
	Po    float64 // observed agreement, the share on the diagonal
	Pe    float64 // agreement expected by chance from the margins
	Kappa float64 // (Po - Pe) / (1 - Pe)
	// SE0 is the standard error under the null hypothesis kappa = 0, for the
	// test kappa / SE0; SE is the large-sample standard error at the observed
	// kappa, for an interval. Both are from Fleiss JL, Cohen J, Everitt BS.
	// Psychol Bull 1969;72:323-7.
	SE0, SE float64
}

// CohenKappa computes kappa from a k x k table whose rows are the first
// rater's categories and columns the second's, in the same order.
// Kappa is undefined when chance agreement is 1 (both raters put every item
// in one and the same category); that is reported as an error.
func CohenKappa(table [][]int) (Kappa, error) {
	k := len(table)
	if k < 2 {
		return Kappa{}, fmt.Errorf("stats: kappa: table has %d rows, want at least 2: %w", k, ErrInvalid)
	}
	n := 0
	for i, row := range table {
		if len(row) != k {
			return Kappa{}, fmt.Errorf("stats: kappa: row %d has %d cells, want %d (square table): %w", i, len(row), k, ErrInvalid)
		}
		for j, v := range row {
			if v < 0 {
				return Kappa{}, fmt.Errorf("stats: kappa: cell [%d][%d] = %d is negative: %w", i, j, v, ErrInvalid)
			}
			n += v
		}
	}
	if n == 0 {
		return Kappa{}, fmt.Errorf("stats: kappa: table is empty: %w", ErrInvalid)
	}
	nf := float64(n)
	p := make([][]float64, k)
	rows := make([]float64, k)
	cols := make([]float64, k)
	for i, row := range table {
		p[i] = make([]float64, k)
		for j, v := range row {
			p[i][j] = float64(v) / nf
			rows[i] += p[i][j]
			cols[j] += p[i][j]
		}
	}
	var po, pe, cross float64
	for i := range k {
		po += p[i][i]
		pe += rows[i] * cols[i]
		cross += rows[i] * cols[i] * (rows[i] + cols[i])
	}
	if pe >= 1 {
		return Kappa{}, fmt.Errorf("stats: kappa: chance agreement is 1 (all items in one category for both raters), kappa is undefined: %w", ErrInvalid)
	}
	kap := (po - pe) / (1 - pe)

	se0 := math.Sqrt(math.Max(0, pe+pe*pe-cross)) / ((1 - pe) * math.Sqrt(nf))

	var a, b float64
	for i := range k {
		t := 1 - (rows[i]+cols[i])*(1-kap)
		a += p[i][i] * t * t
		for j := range k {
			if i != j {
				s := cols[i] + rows[j]
				b += p[i][j] * s * s
			}
		}
	}
	b *= (1 - kap) * (1 - kap)
	c := kap - pe*(1-kap)
	se := math.Sqrt(math.Max(0, a+b-c*c)) / ((1 - pe) * math.Sqrt(nf))

	return Kappa{N: n, Po: po, Pe: pe, Kappa: kap, SE0: se0, SE: se}, nil
}

// CI is the large-sample interval kappa +- z*SE, clipped to [-1, 1].
func (k Kappa) CI(conf float64) (Interval, error) {
	if err := checkConf("kappa", conf); err != nil {
		return Interval{}, err
	}
	z := normalQuantile(conf)
	return Interval{math.Max(-1, k.Kappa-z*k.SE), math.Min(1, k.Kappa+z*k.SE)}, nil
}

// Z is the test statistic kappa / SE0 for the null hypothesis of chance
// agreement only.
func (k Kappa) Z() float64 { return k.Kappa / k.SE0 }
