package mixture

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"runtime"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// split returns the observed and unobserved indices of a mask.
func split(obs []bool) (o, u []int) {
	for j, v := range obs {
		if v {
			o = append(o, j)
		} else {
			u = append(u, j)
		}
	}
	return o, u
}

// bishopConditional computes the conditional mean and covariance of a single
// Gaussian N(mu, cov) by the textbook partitioned formulas (Bishop, Pattern
// Recognition and Machine Learning, 2006, section 2.3.1, equations 2.81 and
// 2.82): μ_a|b = μ_a + Σ_ab Σ_bb⁻¹ (x_b − μ_b), Σ_a|b = Σ_aa − Σ_ab Σ_bb⁻¹ Σ_ba,
// with an explicit inverse from gonum's mat.Dense.Inverse (independent of the
// permuted Cholesky factorisation the package uses).
func bishopConditional(t *testing.T, mu, cov, x []float64, obs []bool) (mean, condCov []float64) {
	t.Helper()
	d := len(mu)
	o, u := split(obs)
	full := mat.NewDense(d, d, cov)
	sbb := mat.NewDense(len(o), len(o), nil)
	sab := mat.NewDense(len(u), len(o), nil)
	saa := mat.NewDense(len(u), len(u), nil)
	for i, a := range o {
		for j, b := range o {
			sbb.Set(i, j, full.At(a, b))
		}
	}
	for i, a := range u {
		for j, b := range o {
			sab.Set(i, j, full.At(a, b))
		}
		for j, b := range u {
			saa.Set(i, j, full.At(a, b))
		}
	}
	var inv mat.Dense
	if err := inv.Inverse(sbb); err != nil {
		t.Fatal(err)
	}
	dev := mat.NewVecDense(len(o), nil)
	for i, b := range o {
		dev.SetVec(i, x[b]-mu[b])
	}
	var k mat.Dense
	k.Mul(sab, &inv)
	var shift mat.VecDense
	shift.MulVec(&k, dev)
	var corr mat.Dense
	corr.Mul(&k, sab.T())
	mean = append([]float64(nil), x...)
	condCov = make([]float64, d*d)
	for i, a := range u {
		mean[a] = mu[a] + shift.AtVec(i)
		for j, b := range u {
			condCov[a*d+b] = saa.At(i, j) - corr.At(i, j)
		}
	}
	return mean, condCov
}

var conditionalMasks = [][]bool{
	{true, false, false, true},
	{false, true, true, true},
	{true, true, false, false},
	{false, false, false, true},
}

// TestConditionalGaussianMatchesBishop checks one Gaussian component against
// the partitioned-Gaussian formulas (Bishop 2006, section 2.3.1) computed
// independently with gonum mat.
func TestConditionalGaussianMatchesBishop(t *testing.T) {
	r := newTestRand(4)
	d := 4
	cov := r.spd(d)
	mu := []float64{1, -2, 0.5, 3}
	m := mustNew(t, single(Gaussian, d, mu, cov, 0))
	x := []float64{1.7, 9, 9, 2.2}
	for _, obs := range conditionalMasks {
		t.Run(fmt.Sprint(obs), func(t *testing.T) {
			res, err := m.Conditional(x, obs, ConditionalOptions{StdDev: true, Covariance: true, Components: true, ComponentScales: true})
			if err != nil {
				t.Fatal(err)
			}
			wantMean, wantCov := bishopConditional(t, mu, cov, x, obs)
			compareSlices(t, "mean vs Bishop 2.81", res.Mean, wantMean, 1e-12)
			compareSlices(t, "covariance vs Bishop 2.82", res.Cov, wantCov, 1e-12)
			compareSlices(t, "component scale (one component)", res.ComponentScales, wantCov, 1e-12)
			for j := 0; j < d; j++ {
				if !closeTo(res.StdDev[j], math.Sqrt(wantCov[j*d+j]), 1e-12) {
					t.Errorf("sd[%d] = %v, sqrt of Bishop variance %v", j, res.StdDev[j], math.Sqrt(wantCov[j*d+j]))
				}
			}
		})
	}
}

type conditionalCase struct {
	Name   string    `json:"name"`
	Family string    `json:"family"`
	Dim    int       `json:"dim"`
	DF     float64   `json:"df"`
	Mean   []float64 `json:"mean"`
	Cov    []float64 `json:"cov"`
	Rows   []struct {
		X              []float64 `json:"x"`
		Observed       []int     `json:"observed"`
		LogConditional float64   `json:"log_conditional"`
	} `json:"rows"`
}

// TestConditionalMatchesScipy evaluates the conditional distribution of one
// component (its location, scale and degrees of freedom as Conditional
// returns them) at the unobserved values x_u, and compares with scipy's
// log f(x) − log f_o(x_o), the joint minus the marginal log-density
// (multivariate_normal / multivariate_t; testdata/missing/make_reference.py),
// to 1e-10. For Student-t components this checks the ν + p_o degrees of
// freedom and the (ν + δ_o)/(ν + p_o) scale factor (Kotz & Nadarajah 2004)
// against an outside evaluation, including ν = 0.7 where the conditional has
// no covariance.
func TestConditionalMatchesScipy(t *testing.T) {
	var doc struct {
		Conditional []conditionalCase `json:"conditional"`
	}
	b, err := os.ReadFile(missingReferenceFile)
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &doc); err != nil || len(doc.Conditional) == 0 {
		t.Fatalf("decode %s: %v (%d conditional cases)", missingReferenceFile, err, len(doc.Conditional))
	}
	for _, c := range doc.Conditional {
		fam, err := ParseFamily(c.Family)
		if err != nil {
			t.Fatal(err)
		}
		m := mustNew(t, single(fam, c.Dim, c.Mean, c.Cov, c.DF))
		for ri, r := range c.Rows {
			obs := make([]bool, c.Dim)
			for j, v := range r.Observed {
				obs[j] = v == 1
			}
			res, err := m.Conditional(r.X, obs, ConditionalOptions{Components: true, ComponentScales: true})
			if err != nil {
				t.Fatalf("%s row %d: %v", c.Name, ri, err)
			}
			_, u := split(obs)
			q := len(u)
			mu, scale, xu := make([]float64, q), make([]float64, q*q), make([]float64, q)
			for a, ua := range u {
				mu[a] = res.ComponentMeans[ua]
				xu[a] = r.X[ua]
				for bb, ub := range u {
					scale[a*q+bb] = res.ComponentScales[ua*c.Dim+ub]
				}
			}
			df := 0.0
			if fam == StudentT {
				df = res.ComponentDF[0]
			}
			cm := mustNew(t, single(fam, q, mu, scale, df))
			got := make([]float64, 1)
			must(t, cm.LogDensity(xu, got))
			if !closeTo(got[0], r.LogConditional, 1e-10) {
				t.Errorf("%s row %d: conditional log-density %.17g, scipy joint − marginal %.17g", c.Name, ri, got[0], r.LogConditional)
			}
		}
	}
}

// TestConditionalStudentTScale checks one Student-t component against the
// partitioned formulas computed independently with gonum mat: location as
// for the Gaussian (Bishop 2006, 2.81), degrees of freedom ν + p_o, scale
// ((ν + δ_o)/(ν + p_o)) times the Schur complement with δ_o from an explicit
// inverse of Σ_oo (Kotz & Nadarajah 2004; the same update as gonum's
// distmv.StudentsT.ConditionStudentsT), and covariance ν'/(ν'−2) times the
// scale.
func TestConditionalStudentTScale(t *testing.T) {
	r := newTestRand(5)
	d := 4
	cov := r.spd(d)
	mu := []float64{-1, 2, 0, 4}
	x := []float64{0.2, 3, -5, 6}
	for _, nu := range []float64{1.5, 4, 30} {
		m := mustNew(t, single(StudentT, d, mu, cov, nu))
		for _, obs := range conditionalMasks {
			o, u := split(obs)
			res, err := m.Conditional(x, obs, ConditionalOptions{StdDev: true, Covariance: true, Components: true, ComponentScales: true})
			if err != nil {
				t.Fatalf("nu %v %v: %v", nu, obs, err)
			}
			wantMean, schur := bishopConditional(t, mu, cov, x, obs)
			sub := mat.NewDense(len(o), len(o), nil)
			dev := mat.NewVecDense(len(o), nil)
			for i, a := range o {
				dev.SetVec(i, x[a]-mu[a])
				for j, b := range o {
					sub.Set(i, j, cov[a*d+b])
				}
			}
			var inv mat.Dense
			if err := inv.Inverse(sub); err != nil {
				t.Fatal(err)
			}
			var tmp mat.VecDense
			tmp.MulVec(&inv, dev)
			delta := mat.Dot(dev, &tmp)
			p := float64(len(o))
			nu2 := nu + p
			if res.ComponentDF[0] != nu2 {
				t.Errorf("nu %v %v: conditional df %v, want %v", nu, obs, res.ComponentDF[0], nu2)
			}
			compareSlices(t, "t conditional mean", res.Mean, wantMean, 1e-12)
			for _, a := range u {
				for _, b := range u {
					scale := (nu + delta) / nu2 * schur[a*d+b]
					if !closeTo(res.ComponentScales[a*d+b], scale, 1e-12) {
						t.Errorf("nu %v %v: scale[%d][%d] = %v, want %v", nu, obs, a, b, res.ComponentScales[a*d+b], scale)
					}
					if !closeTo(res.Cov[a*d+b], nu2/(nu2-2)*scale, 1e-12) {
						t.Errorf("nu %v %v: cov[%d][%d] = %v, want %v", nu, obs, a, b, res.Cov[a*d+b], nu2/(nu2-2)*scale)
					}
				}
			}
		}
	}
}

// TestConditionalMixture checks the mixture-level results against their
// definitions: weights equal the marginal posteriors, the mean is the
// posterior-weighted component mean, the covariance follows the law of
// total covariance, observed features are copied with zero spread, a
// completely observed row is unchanged and a row with nothing observed gets
// the model's own moments.
func TestConditionalMixture(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		m := randomModel(t, f, Full, 4, 3, 21)
		if f == StudentT {
			// Moments need ν > 2 when nothing is observed.
			p := m.Params()
			for i := range p.Components {
				p.Components[i].DF = []float64{3, 7, 50}[i]
			}
			m = mustNew(t, p)
		}
		x := []float64{
			1, 2, 0, 0,
			0, 0, 0, 0,
			-1, 3, 2, 0.5,
			4, 0, 0, 1,
		}
		obs := []bool{
			true, true, false, false,
			false, false, false, false,
			true, true, true, true,
			true, false, false, true,
		}
		res, err := m.Conditional(x, obs, ConditionalOptions{StdDev: true, Covariance: true, Components: true, ComponentScales: true})
		if err != nil {
			t.Fatal(err)
		}
		d, k := 4, 3
		mo := MarginalOutput{LogDensity: make([]float64, 4), Posteriors: make([]float64, 4*k)}
		must(t, m.Marginal(x, obs, &mo))
		compareSlices(t, "conditional weights vs marginal posteriors", res.Posteriors, mo.Posteriors, 1e-13)
		compareSlices(t, "log-density vs marginal", res.LogDensity, mo.LogDensity, 1e-13)
		for i := 0; i < 4; i++ {
			post := res.Posteriors[i*k : (i+1)*k]
			for j := 0; j < d; j++ {
				// Mean: Σ π_k m_k.
				want := 0.0
				for c := 0; c < k; c++ {
					want += post[c] * res.ComponentMeans[(i*k+c)*d+j]
				}
				if !closeTo(res.Mean[i*d+j], want, 1e-12) {
					t.Errorf("%v row %d mean[%d] = %v, Σ π m = %v", f, i, j, res.Mean[i*d+j], want)
				}
				if obs[i*d+j] && (res.Mean[i*d+j] != x[i*d+j] || res.StdDev[i*d+j] != 0) {
					t.Errorf("%v row %d: observed feature %d not copied with zero spread", f, i, j)
				}
				// Law of total covariance.
				for l := 0; l < d; l++ {
					want := 0.0
					for c := 0; c < k; c++ {
						g := 1.0
						if f == StudentT {
							nu2 := res.ComponentDF[i*k+c]
							g = nu2 / (nu2 - 2)
						}
						mj := res.ComponentMeans[(i*k+c)*d+j] - res.Mean[i*d+j]
						ml := res.ComponentMeans[(i*k+c)*d+l] - res.Mean[i*d+l]
						want += post[c] * (g*res.ComponentScales[((i*k+c)*d+j)*d+l] + mj*ml)
					}
					if !closeTo(res.Cov[(i*d+j)*d+l], want, 1e-12) {
						t.Errorf("%v row %d cov[%d][%d] = %v, law of total covariance %v", f, i, j, l, res.Cov[(i*d+j)*d+l], want)
					}
				}
			}
		}
		// Row 2: complete, unchanged.
		if !slices.Equal(res.Mean[8:12], x[8:12]) {
			t.Errorf("%v complete row changed: %v", f, res.Mean[8:12])
		}
		// Row 1: nothing observed: the model's own mean and covariance.
		wantMean := make([]float64, d)
		for _, c := range m.params.Components {
			for j := range wantMean {
				wantMean[j] += c.Weight * c.Mean[j]
			}
		}
		compareSlices(t, "row with nothing observed: mean", res.Mean[4:8], wantMean, 1e-12)
		for j := 0; j < d; j++ {
			for l := 0; l < d; l++ {
				want := 0.0
				for _, c := range m.params.Components {
					g := 1.0
					if f == StudentT {
						g = c.DF / (c.DF - 2)
					}
					want += c.Weight * (g*c.Cov[j*d+l] + (c.Mean[j]-wantMean[j])*(c.Mean[l]-wantMean[l]))
				}
				if !closeTo(res.Cov[(d+j)*d+l], want, 1e-12) {
					t.Errorf("%v nothing observed: cov[%d][%d] = %v, model covariance %v", f, j, l, res.Cov[(d+j)*d+l], want)
				}
			}
		}
	}
}

// TestConditionalNoMoment checks the errors for Student-t conditionals
// without a mean or covariance, and that the mean alone is still served
// when it exists.
func TestConditionalNoMoment(t *testing.T) {
	m := mustNew(t, single(StudentT, 2, []float64{0, 0}, []float64{1, 0.3, 0.3, 1}, 0.8))
	// Nothing observed: ν' = 0.8, no mean.
	_, err := m.Conditional([]float64{0, 0}, []bool{false, false}, ConditionalOptions{})
	if !errors.Is(err, ErrNoMoment) || !containsAll(err.Error(), "row 0", "component 0", "mean") {
		t.Errorf("no mean: %v", err)
	}
	// One observed: ν' = 1.8, mean but no covariance.
	if _, err := m.Conditional([]float64{1, 0}, []bool{true, false}, ConditionalOptions{}); err != nil {
		t.Errorf("mean only: %v", err)
	}
	_, err = m.Conditional([]float64{1, 0}, []bool{true, false}, ConditionalOptions{StdDev: true})
	if !errors.Is(err, ErrNoMoment) || !containsAll(err.Error(), "covariance") {
		t.Errorf("no covariance: %v", err)
	}
	if _, err := m.Conditional([]float64{1, 0}, nil, ConditionalOptions{Draws: -1}); err == nil {
		t.Error("negative draws accepted")
	}
}

func containsAll(s string, parts ...string) bool {
	for _, p := range parts {
		if !strings.Contains(s, p) {
			return false
		}
	}
	return true
}

// TestConditionalDraws checks multiple imputation: the draws' empirical mean
// and covariance of the unobserved features agree with the conditional mean
// and covariance within 5 standard errors (large-sample standard errors of a
// mean and of a variance, common practice), observed features are copied,
// draws are reproducible, a prefix of more draws equals fewer draws, and a
// batch split with FirstRow gives the same draws.
func TestConditionalDraws(t *testing.T) {
	for _, f := range []Family{Gaussian, StudentT} {
		m := pumpModel(t, f, 9)
		x := []float64{100, 0, 0, 12, 3, 0}
		obs := []bool{true, false, false, true, true, false}
		n := 40000
		if raceEnabled {
			n = 8000
		}
		res, err := m.Conditional(x, obs, ConditionalOptions{Covariance: true, Draws: n, Seed: 3})
		if err != nil {
			t.Fatal(err)
		}
		for i, u := range []int{1, 0} { // unobserved column of each row
			o := 1 - u
			mean, m2 := 0.0, 0.0
			for a := 0; a < n; a++ {
				dr := res.Draws[(i*n+a)*2 : (i*n+a+1)*2]
				if dr[o] != x[i*2+o] {
					t.Fatalf("%v row %d draw %d: observed value %v not copied", f, i, a, dr[o])
				}
				delta := dr[u] - mean
				mean += delta / float64(a+1)
				m2 += delta * (dr[u] - mean)
			}
			variance := m2 / float64(n-1)
			wantMean := res.Mean[i*2+u]
			wantVar := res.Cov[(i*2+u)*2+u]
			if se := math.Sqrt(wantVar / float64(n)); math.Abs(mean-wantMean) > 5*se {
				t.Errorf("%v row %d: draw mean %v, conditional mean %v (se %v)", f, i, mean, wantMean, se)
			}
			// Var of the sample variance ≈ (μ4 − σ⁴)/n; bound μ4 by 10σ⁴
			// for these (mixture, t with ν' ≥ 10) tails.
			if se := math.Sqrt(9 * wantVar * wantVar / float64(n)); math.Abs(variance-wantVar) > 5*se {
				t.Errorf("%v row %d: draw variance %v, conditional variance %v (se %v)", f, i, variance, wantVar, se)
			}
		}
		again, _ := m.Conditional(x, obs, ConditionalOptions{Draws: 10, Seed: 3})
		for i := 0; i < 2; i++ {
			if !slices.Equal(again.Draws[i*10*2:(i*10+10)*2], res.Draws[i*n*2:(i*n+10)*2]) {
				t.Errorf("%v row %d: 10 draws differ from the first 10 of %d", f, i, n)
			}
		}
		second, _ := m.Conditional(x[2:], obs[2:], ConditionalOptions{Draws: 10, Seed: 3, FirstRow: 1})
		if !slices.Equal(second.Draws, again.Draws[20:]) {
			t.Errorf("%v: row 1 alone with FirstRow 1 differs from row 1 in the batch", f)
		}
		other, _ := m.Conditional(x, obs, ConditionalOptions{Draws: 10, Seed: 4})
		if slices.Equal(other.Draws, again.Draws) {
			t.Errorf("%v: seeds 3 and 4 gave the same draws", f)
		}
	}
}

// TestConditionalParallelBitIdentical checks that a batch large enough to be
// split gives the same bits for GOMAXPROCS 1 and 3, draws included, and that
// the lowest failing row is reported whatever the scheduling.
func TestConditionalParallelBitIdentical(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	m := randomModel(t, Gaussian, Full, 5, 3, 4)
	rows := ParallelMinRows + 500
	r := newTestRand(6)
	x := make([]float64, rows*5)
	obs := make([]bool, len(x))
	for i := range x {
		x[i] = 3 * r.NormFloat64()
		obs[i] = r.Float64() < 0.5
	}
	opts := ConditionalOptions{StdDev: true, Draws: 2, Seed: 8}
	runtime.GOMAXPROCS(1)
	a, err := m.Conditional(x, obs, opts)
	must(t, err)
	runtime.GOMAXPROCS(3)
	b, err := m.Conditional(x, obs, opts)
	must(t, err)
	compareSlices(t, "means procs 1 vs 3", a.Mean, b.Mean, 0)
	compareSlices(t, "sd procs 1 vs 3", a.StdDev, b.StdDev, 0)
	compareSlices(t, "draws procs 1 vs 3", a.Draws, b.Draws, 0)

	// Errors come from the lowest failing row whatever the scheduling: the
	// pattern "feature 0 only" appears first (row 50, fine) and fails at row
	// 4100; the later pattern "features 0 and 1" fails at row 600 (values so
	// large that the Student-t conditional scale overflows).
	ht := mustNew(t, Params{Dim: 5, Family: StudentT, Structure: Full, Components: []Component{
		{Weight: 0.5, Mean: make([]float64, 5), Cov: m.params.Components[0].Cov, DF: 5},
		{Weight: 0.5, Mean: make([]float64, 5), Cov: m.params.Components[1].Cov, DF: 9},
	}})
	x2 := append([]float64(nil), x...)
	obs2 := make([]bool, len(x))
	for i := range obs2 {
		obs2[i] = true
	}
	for _, row := range []int{50, 4100} {
		for j := 1; j < 5; j++ {
			obs2[row*5+j] = false
		}
	}
	for j := 2; j < 5; j++ {
		obs2[600*5+j] = false
	}
	x2[4100*5], x2[600*5] = 1e300, 1e300
	for _, procs := range []int{1, 3} {
		runtime.GOMAXPROCS(procs)
		_, err := ht.Conditional(x2, obs2, ConditionalOptions{StdDev: true})
		if err == nil || !strings.Contains(err.Error(), "row 600:") || !strings.Contains(err.Error(), "not finite") {
			t.Errorf("procs %d: %v", procs, err)
		}
	}
}
