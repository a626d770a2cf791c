package em

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// TestBlockedEStepMatchesRowByRow: the blocked E-step (vector kernel) gives
// the row-by-row E-step's log-densities, log-likelihood and moment sums bit
// for bit, over several iterations (so with fitted, unequal components),
// for full and tied covariances, with and without row weights, with rows
// so far away that distances overflow, and for row counts that leave
// partial blocks.
func TestBlockedEStepMatchesRowByRow(t *testing.T) {
	if !useSIMD {
		t.Skip("the blocked E-step runs only with the vector kernel")
	}
	for _, tc := range []struct {
		n, d, k int
		s       mixture.Structure
		weights bool
	}{
		{997, 1, 3, mixture.Full, false},
		{2500, 2, 8, mixture.Full, true},
		{1531, 3, 4, mixture.Tied, false},
		{4099, 8, 8, mixture.Full, false},
		{777, 13, 5, mixture.Full, true},
		{1200, 32, 6, mixture.Full, false},
		{640, 9, 3, mixture.Tied, true},
	} {
		t.Run(fmt.Sprintf("n%d_d%d_k%d_%v_w%v", tc.n, tc.d, tc.k, tc.s, tc.weights), func(t *testing.T) {
			data := benchData(tc.n, tc.d)
			rng := rand.New(rand.NewPCG(uint64(tc.n), 9))
			for _, i := range []int{5, tc.n / 2, tc.n - 1} { // far rows
				for j := 0; j < tc.d; j++ {
					data.Values[i*tc.d+j] = 1e90 * (rng.Float64() - 0.5)
				}
			}
			if tc.weights {
				data.Weights = make([]float64, tc.n)
				for i := range data.Weights {
					data.Weights[i] = float64(rng.IntN(3))
				}
			}
			p, err := newProblem(data)
			if err != nil {
				t.Fatal(err)
			}
			cfg, err := resolve(data, fitters.Settings{Components: tc.k, Structure: tc.s, Ridge: -1}, p)
			if err != nil {
				t.Fatal(err)
			}
			if err := p.prepare(cfg); err != nil {
				t.Fatal(err)
			}
			st, err := p.startState(cfg, tc.k, rand.New(rand.NewPCG(1, 2)))
			if err != nil {
				t.Fatal(err)
			}
			blocked, rows := newPass(p, tc.k), newPass(p, tc.k)
			res := &runResult{}
			for it := 1; it <= 4; it++ {
				for c := range blocked.chunks {
					a, b := &blocked.chunks[c], &rows.chunks[c]
					blocked.chunk(st, a) // blocked (useSIMD)
					b.ll = 0
					clear(b.nk)
					clear(b.sx)
					clear(b.sxx)
					rows.chunkFull(st, b)
					same := func(what string, x, y []float64) {
						t.Helper()
						for i := range x {
							if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
								t.Fatalf("iteration %d chunk %d: %s[%d] = %v, row by row %v", it, c, what, i, x[i], y[i])
							}
						}
					}
					same("ll", []float64{a.ll}, []float64{b.ll})
					same("nk", a.nk, b.nk)
					same("sx", a.sx, b.sx)
					same("sxx", a.sxx, b.sxx)
				}
				same := blocked.rowLD
				for i := range same {
					if math.Float64bits(same[i]) != math.Float64bits(rows.rowLD[i]) {
						t.Fatalf("iteration %d: row %d log-density %v, row by row %v", it, i, same[i], rows.rowLD[i])
					}
				}
				blocked.run(st)
				p.mstep(st, blocked, it, res)
			}
		})
	}
}
