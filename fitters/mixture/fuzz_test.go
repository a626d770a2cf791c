package mixture

import (
	"encoding/binary"
	"math"
	"testing"
)

// byteReader hands out values from fuzz input, zeros once exhausted.
type byteReader struct{ b []byte }

func (r *byteReader) byte() byte {
	if len(r.b) == 0 {
		return 0
	}
	v := r.b[0]
	r.b = r.b[1:]
	return v
}

// raw returns the next 8 bytes as float64 bits (any value, NaN and ±Inf included).
func (r *byteReader) raw() float64 {
	var buf [8]byte
	n := copy(buf[:], r.b)
	r.b = r.b[n:]
	return math.Float64frombits(binary.LittleEndian.Uint64(buf[:]))
}

// small returns a modest value in [-8, 8) from one byte.
func (r *byteReader) small() float64 { return float64(int8(r.byte())) / 16 }

// value returns either a raw or a modest value depending on mode.
func (r *byteReader) value(rawMode bool) float64 {
	if rawMode {
		return r.raw()
	}
	return r.small()
}

// paramsFromBytes decodes arbitrary bytes into Params: in "structured" mode
// covariances are built as A Aᵀ + εI so many inputs are valid; in raw mode
// every number is arbitrary float64 bits.
func paramsFromBytes(b []byte) Params {
	r := &byteReader{b: b}
	mode := r.byte()
	rawMode := mode&1 == 1
	dim := int(r.byte()%5) + 1
	k := int(r.byte()%4) + 1
	if mode&2 != 0 { // occasionally invalid shapes
		dim = int(r.byte()%7) - 1
		k = int(r.byte() % 5)
	}
	fam := Family(r.byte()%3) + 0
	if mode&4 == 0 {
		fam = Family(int(fam)%2 + 1)
	}
	st := Structure(r.byte()%5) + 0
	if mode&8 == 0 {
		st = Structure(int(st)%4 + 1)
	}
	p := Params{Dim: dim, Family: fam, Structure: st}
	d := max(dim, 0)
	var shared []float64
	for c := 0; c < k; c++ {
		comp := Component{Weight: 1 / float64(k)}
		if rawMode {
			comp.Weight = r.raw()
		}
		comp.Mean = make([]float64, d)
		for i := range comp.Mean {
			comp.Mean[i] = r.value(rawMode)
		}
		cov := make([]float64, d*d)
		if rawMode {
			for i := range cov {
				cov[i] = r.raw()
			}
		} else {
			a := make([]float64, d*d)
			for i := range a {
				a[i] = r.small()
			}
			for i := 0; i < d; i++ {
				for j := 0; j < d; j++ {
					v := 0.0
					for l := 0; l < d; l++ {
						v += a[i*d+l] * a[j*d+l]
					}
					if i == j {
						v += math.Ldexp(1, -int(r.byte()%60))
					}
					cov[i*d+j] = v
				}
			}
			if st == Diagonal || st == Spherical {
				for i := 0; i < d; i++ {
					for j := 0; j < d; j++ {
						if i != j {
							cov[i*d+j] = 0
						} else if st == Spherical {
							cov[i*d+j] = cov[0]
						}
					}
				}
			}
			if st == Tied {
				if shared == nil {
					shared = cov
				}
				cov = append([]float64(nil), shared...)
			}
		}
		comp.Cov = cov
		if fam == StudentT {
			comp.DF = math.Ldexp(float64(r.byte()%200+1), int(r.byte()%80)-20)
			if rawMode {
				comp.DF = r.raw()
			}
		}
		p.Components = append(p.Components, comp)
	}
	return p
}

// checkModelOutputs evaluates m on the given finite rows and fails on any NaN.
func checkModelOutputs(t *testing.T, m *Model, x []float64) {
	t.Helper()
	rows, k := len(x)/m.Dim(), m.K()
	ld, post, lpost := make([]float64, rows), make([]float64, rows*k), make([]float64, rows*k)
	maha, comp := make([]float64, rows*k), make([]float64, rows*k)
	labels, maxPost := make([]int, rows), make([]float64, rows)
	must(t, m.Posteriors(x, ld, post, lpost))
	must(t, m.Mahalanobis(x, maha))
	must(t, m.ComponentLogDensity(x, comp))
	must(t, m.Assign(x, labels, maxPost))
	ll, err := m.LogLikelihood(x, nil)
	must(t, err)
	for name, v := range map[string][]float64{"log-density": ld, "posterior": post, "log-posterior": lpost,
		"mahalanobis": maha, "component": comp, "max posterior": maxPost, "log-likelihood": {ll}} {
		for i, e := range v {
			if math.IsNaN(e) {
				t.Fatalf("%s[%d] is NaN (rows %v)", name, i, x)
			}
		}
	}
	for i := 0; i < rows; i++ {
		if labels[i] < 0 || labels[i] >= k {
			t.Fatalf("label %d out of range", labels[i])
		}
		sum := 0.0
		for a := 0; a < k; a++ {
			sum += post[i*k+a]
		}
		if math.Abs(sum-1) > 1e-9 {
			t.Fatalf("row %d: posteriors sum to %v", i, sum)
		}
	}
}

func FuzzNew(f *testing.F) {
	f.Add([]byte{0, 1, 1, 0, 0, 10, 20, 30, 40, 50})
	f.Add([]byte{0, 2, 2, 1, 2, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12})
	f.Add([]byte{0, 4, 3, 1, 3, 200, 100, 50, 25, 12, 6, 3, 1, 0, 9})
	f.Add([]byte{1, 1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0xf0, 0x3f, 0, 0, 0, 0, 0, 0, 0, 0})
	f.Add([]byte{2, 6, 4, 0, 0})
	f.Add([]byte{12, 3, 2, 2, 4})
	f.Fuzz(func(t *testing.T, b []byte) {
		p := paramsFromBytes(b)
		verr := p.Validate()
		m, err := New(p)
		if (verr == nil) != (err == nil) {
			t.Fatalf("Validate error %v but New error %v", verr, err)
		}
		if err != nil {
			if m != nil {
				t.Fatalf("New returned a model and an error")
			}
			return
		}
		// Rows: the means, the origin, and far points.
		d := m.Dim()
		var x []float64
		for _, c := range p.Components {
			x = append(x, c.Mean...)
		}
		for _, v := range []float64{0, 1e3, -1e8, 1e200} {
			for i := 0; i < d; i++ {
				x = append(x, v*float64(i%2*2-1))
			}
		}
		checkModelOutputs(t, m, x)
		s, _ := m.Sample(16, 1)
		for _, v := range s {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("sample %v is not finite", v)
			}
		}
		if m.FreeParameters() < 1 {
			t.Fatalf("FreeParameters %d", m.FreeParameters())
		}
	})
}

func FuzzEvaluate(f *testing.F) {
	f.Add(uint8(0), []byte{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16})
	f.Add(uint8(5), []byte{0, 0, 0, 0, 0, 0, 0xf0, 0x7f, 0, 0, 0, 0, 0, 0, 0xf8, 0x7f})
	f.Add(uint8(3), []byte{0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xef, 0x7f, 0, 0, 0, 0, 0, 0, 0, 0x80})
	models := map[uint8]*Model{}
	i := uint8(0)
	for _, fam := range []Family{Gaussian, StudentT} {
		for _, st := range []Structure{Full, Diagonal, Spherical, Tied} {
			models[i] = randomModel(f, fam, st, 2, 3, uint64(i)+1)
			i++
		}
	}
	f.Fuzz(func(t *testing.T, which uint8, b []byte) {
		m := models[which%uint8(len(models))]
		r := &byteReader{b: b}
		n := len(b) / 8
		x := make([]float64, n)
		finite := true
		for j := range x {
			x[j] = r.raw()
			if math.IsNaN(x[j]) || math.IsInf(x[j], 0) {
				finite = false
			}
		}
		out := make([]float64, n/2)
		err := m.LogDensity(x, out)
		switch {
		case n%2 != 0:
			if err == nil {
				t.Fatalf("ragged input of %d values accepted", n)
			}
			return
		case !finite:
			if err == nil {
				t.Fatalf("non-finite input accepted")
			}
			return
		case err != nil:
			t.Fatalf("finite input rejected: %v", err)
		}
		checkModelOutputs(t, m, x)
	})
}
