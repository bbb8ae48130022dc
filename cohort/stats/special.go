package stats

import "math"

// The special functions below are our own, written from the textbook
// definitions (series and continued fractions for the regularised incomplete
// beta and gamma functions), so that tests can hold them against an
// independent reference library instead of against themselves.

const (
	cfEps     = 4e-16 // relative change at which a series or continued fraction has converged (two ulps)
	cfTiny    = 1e-300
	cfMaxIter = 1 << 20
)

// betaTails returns I_x(a, b) and 1 - I_x(a, b), each computed on the side
// where it is the directly evaluated quantity, so a small tail keeps its
// relative precision instead of being the difference of two numbers near 1.
func betaTails(a, b, x float64) (lower, upper float64) {
	switch {
	case x <= 0:
		return 0, 1
	case x >= 1:
		return 1, 0
	}
	lbeta := lgamma(a+b) - lgamma(a) - lgamma(b)
	front := math.Exp(lbeta + a*math.Log(x) + b*math.Log1p(-x))
	if x < (a+1)/(a+b+2) {
		lower = front * betaCF(a, b, x) / a
		return lower, 1 - lower
	}
	upper = front * betaCF(b, a, 1-x) / b
	return 1 - upper, upper
}

// betaCF evaluates the continued fraction of the incomplete beta function by
// the modified Lentz method.
func betaCF(a, b, x float64) float64 {
	qab, qap, qam := a+b, a+1, a-1
	c := 1.0
	d := 1 - qab*x/qap
	if math.Abs(d) < cfTiny {
		d = cfTiny
	}
	d = 1 / d
	h := d
	for m := 1; m <= cfMaxIter; m++ {
		fm := float64(m)
		m2 := 2 * fm
		aa := fm * (b - fm) * x / ((qam + m2) * (a + m2))
		d = 1 + aa*d
		if math.Abs(d) < cfTiny {
			d = cfTiny
		}
		c = 1 + aa/c
		if math.Abs(c) < cfTiny {
			c = cfTiny
		}
		d = 1 / d
		h *= d * c
		aa = -(a + fm) * (qab + fm) * x / ((a + m2) * (qap + m2))
		d = 1 + aa*d
		if math.Abs(d) < cfTiny {
			d = cfTiny
		}
		c = 1 + aa/c
		if math.Abs(c) < cfTiny {
			c = cfTiny
		}
		d = 1 / d
		del := d * c
		h *= del
		if math.Abs(del-1) < cfEps {
			break
		}
	}
	return h
}

// gammaTails returns the regularised incomplete gamma functions P(a, x) and
// Q(a, x) = 1 - P(a, x), the smaller one evaluated directly.
func gammaTails(a, x float64) (p, q float64) {
	if x <= 0 {
		return 0, 1
	}
	front := math.Exp(-x + a*math.Log(x) - lgamma(a))
	if x < a+1 {
		// Series: P = front * sum_{k>=0} x^k / (a (a+1) ... (a+k)).
		ap, term := a, 1/a
		sum := term
		for range cfMaxIter {
			ap++
			term *= x / ap
			sum += term
			if math.Abs(term) < math.Abs(sum)*cfEps {
				break
			}
		}
		p = front * sum
		return p, 1 - p
	}
	// Continued fraction for Q (modified Lentz).
	b := x + 1 - a
	c := 1 / cfTiny
	d := 1 / b
	h := d
	for i := 1; i <= cfMaxIter; i++ {
		an := -float64(i) * (float64(i) - a)
		b += 2
		d = an*d + b
		if math.Abs(d) < cfTiny {
			d = cfTiny
		}
		c = b + an/c
		if math.Abs(c) < cfTiny {
			c = cfTiny
		}
		d = 1 / d
		del := d * c
		h *= del
		if math.Abs(del-1) < cfEps {
			break
		}
	}
	q = front * h
	return 1 - q, q
}

func lgamma(x float64) float64 {
	v, _ := math.Lgamma(x)
	return v
}

// bisect finds where the increasing function f crosses zero in [lo, hi],
// halving until the bracket is as narrow as float64 allows relative to its
// ends. Bisection is slow but cannot fail on a monotone function, which matters
// more here than speed: a wrong interval bound is worse than a slow one.
func bisect(f func(float64) float64, lo, hi float64) float64 {
	for range 2000 {
		mid := lo + (hi-lo)/2
		if mid <= lo || mid >= hi || hi-lo <= 1e-15*math.Abs(mid) {
			return mid
		}
		if f(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo + (hi-lo)/2
}

// betaLowerQuantile returns the x at which the lower tail I_x(a, b) equals p.
func betaLowerQuantile(p, a, b float64) float64 {
	return bisect(func(x float64) float64 {
		lo, _ := betaTails(a, b, x)
		return lo - p
	}, 0, 1)
}

// betaUpperQuantile returns the x at which the upper tail 1 - I_x(a, b)
// equals p, solved on the upper tail itself for precision.
func betaUpperQuantile(p, a, b float64) float64 {
	return bisect(func(x float64) float64 {
		_, up := betaTails(a, b, x)
		return p - up
	}, 0, 1)
}

// gammaLowerQuantile returns the x (unit rate) at which P(a, x) equals p.
func gammaLowerQuantile(p, a float64) float64 {
	f := func(x float64) float64 {
		lo, _ := gammaTails(a, x)
		return lo - p
	}
	return bisect(f, 0, gammaBracket(f, a))
}

// gammaUpperQuantile returns the x (unit rate) at which Q(a, x) equals p.
func gammaUpperQuantile(p, a float64) float64 {
	f := func(x float64) float64 {
		_, up := gammaTails(a, x)
		return p - up
	}
	return bisect(f, 0, gammaBracket(f, a))
}

// gammaBracket doubles an upper end until the increasing f is non-negative.
func gammaBracket(f func(float64) float64, a float64) float64 {
	hi := a + 10
	for f(hi) < 0 && hi < math.MaxFloat64/4 {
		hi *= 2
	}
	return hi
}

// normalQuantile is the standard normal quantile for a two-sided confidence
// level: the z with P(|Z| <= z) = conf.
func normalQuantile(conf float64) float64 {
	return math.Sqrt2 * math.Erfinv(conf)
}
