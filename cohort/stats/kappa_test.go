package stats

import (
	"math"
	"testing"
)

func TestCohenKappaPublished(t *testing.T) {
	tests := []struct {
		name          string
		table         [][]int
		po, pe, kappa float64
		tol           float64
		se0           float64 // NaN: not published for this table
	}{
		// Standard 2x2 textbook example (verified, secondary):
		// yes/yes 20, yes/no 5, no/yes 10, no/no 15.
		{"2x2", [][]int{{20, 5}, {10, 15}}, 0.70, 0.50, 0.40, 1e-12, math.NaN()},
		// 3x3 from published documentation of a kappa program (verified;
		// computed): po 0.770, pe 0.336, kappa 0.6537, SE under kappa = 0 0.069.
		{"3x3", [][]int{{25, 3, 5}, {6, 32, 8}, {1, 0, 20}}, 0.770, 0.336, 0.6537, 0.0005, 0.069},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := CohenKappa(tt.table)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "po", got.Po, tt.po, tt.tol)
			near(t, "pe", got.Pe, tt.pe, tt.tol)
			near(t, "kappa", got.Kappa, tt.kappa, tt.tol)
			if !math.IsNaN(tt.se0) {
				near(t, "SE0", got.SE0, tt.se0, 0.0005)
			}
		})
	}
}

// The large-sample SE of Fleiss, Cohen and Everitt (Psychol Bull
// 1969;72:323-7) is the delta-method variance of kappa under multinomial
// sampling. We check it against that definition computed a second way:
// Var = (sum p_ij g_ij^2 - (sum p_ij g_ij)^2) / n with g the numerical
// gradient of kappa in the cell probabilities (computed).
func TestCohenKappaSEByDeltaMethod(t *testing.T) {
	for _, table := range [][][]int{
		{{20, 5}, {10, 15}},
		{{25, 3, 5}, {6, 32, 8}, {1, 0, 20}},
		{{40, 2, 1, 0}, {3, 30, 4, 1}, {0, 5, 22, 2}, {1, 0, 3, 11}},
	} {
		got, err := CohenKappa(table)
		if err != nil {
			t.Fatal(err)
		}
		near(t, "SE", got.SE, deltaMethodSE(table), 1e-6)
	}
}

// deltaMethodSE evaluates kappa as a plain function of cell proportions and
// differentiates it numerically; it shares no formula with CohenKappa's SE.
func deltaMethodSE(table [][]int) float64 {
	k := len(table)
	n := 0.0
	for _, r := range table {
		for _, v := range r {
			n += float64(v)
		}
	}
	p := make([]float64, k*k)
	for i := range k {
		for j := range k {
			p[i*k+j] = float64(table[i][j]) / n
		}
	}
	kappaOf := func(q []float64) float64 {
		var po, pe float64
		for i := range k {
			po += q[i*k+i]
			var r, c float64
			for j := range k {
				r += q[i*k+j]
				c += q[j*k+i]
			}
			pe += r * c
		}
		return (po - pe) / (1 - pe)
	}
	g := make([]float64, len(p))
	const h = 1e-6
	for i := range p {
		up := append([]float64(nil), p...)
		dn := append([]float64(nil), p...)
		up[i] += h
		dn[i] -= h
		g[i] = (kappaOf(up) - kappaOf(dn)) / (2 * h)
	}
	var m1, m2 float64
	for i := range p {
		m1 += p[i] * g[i]
		m2 += p[i] * g[i] * g[i]
	}
	return math.Sqrt((m2 - m1*m1) / n)
}

func TestCohenKappaCIAndZ(t *testing.T) {
	k, err := CohenKappa([][]int{{25, 3, 5}, {6, 32, 8}, {1, 0, 20}})
	if err != nil {
		t.Fatal(err)
	}
	ci, err := k.CI(0.95)
	if err != nil {
		t.Fatal(err)
	}
	z := 1.959963984540054 // standard normal 0.975 quantile (computed)
	near(t, "CI lower", ci.Lo, k.Kappa-z*k.SE, 1e-12)
	near(t, "CI upper", ci.Hi, k.Kappa+z*k.SE, 1e-12)
	near(t, "Z", k.Z(), k.Kappa/k.SE0, 0)
	_, err = k.CI(1.5)
	wantInvalid(t, "conf 1.5", err)

	// Perfect agreement: kappa 1 exactly.
	perfect, err := CohenKappa([][]int{{10, 0}, {0, 7}})
	if err != nil {
		t.Fatal(err)
	}
	near(t, "perfect kappa", perfect.Kappa, 1, 1e-15)
}

func TestCohenKappaInvalid(t *testing.T) {
	tests := []struct {
		name  string
		table [][]int
	}{
		{"empty", nil},
		{"1x1", [][]int{{5}}},
		{"ragged", [][]int{{1, 2}, {3}}},
		{"negative", [][]int{{1, -2}, {3, 4}}},
		{"all zero", [][]int{{0, 0}, {0, 0}}},
		{"one category for both", [][]int{{9, 0}, {0, 0}}},
	}
	for _, tt := range tests {
		_, err := CohenKappa(tt.table)
		wantInvalid(t, tt.name, err)
	}
}
