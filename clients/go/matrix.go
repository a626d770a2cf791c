package mixdclient

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// Matrix is a dense row-major matrix of float64 values: Rows×Cols values in
// Values, row after row.
type Matrix struct {
	Rows   int
	Cols   int
	Values []float64
}

// FromRows copies a slice of equally long rows into a Matrix. It returns an
// error naming the first row whose length differs from the first row's.
func FromRows(rows [][]float64) (Matrix, error) {
	if len(rows) == 0 {
		return Matrix{}, nil
	}
	cols := len(rows[0])
	m := Matrix{Rows: len(rows), Cols: cols, Values: make([]float64, 0, len(rows)*cols)}
	for i, r := range rows {
		if len(r) != cols {
			return Matrix{}, fmt.Errorf("mixdclient: row %d has %d values, row 0 has %d", i, len(r), cols)
		}
		m.Values = append(m.Values, r...)
	}
	return m, nil
}

// Row returns row i as a slice into m.Values.
func (m Matrix) Row(i int) []float64 { return m.Values[i*m.Cols : (i+1)*m.Cols] }

// check reports whether the shape matches the values.
func (m Matrix) check(field string) error {
	if m.Rows < 0 || m.Cols < 0 {
		return fmt.Errorf("mixdclient: %s: negative shape %d×%d", field, m.Rows, m.Cols)
	}
	if m.Cols > 0 && m.Rows > math.MaxInt/m.Cols {
		return fmt.Errorf("mixdclient: %s: shape %d×%d overflows", field, m.Rows, m.Cols)
	}
	if len(m.Values) != m.Rows*m.Cols {
		return fmt.Errorf("mixdclient: %s: %d values for shape %d×%d (want %d)",
			field, len(m.Values), m.Rows, m.Cols, m.Rows*m.Cols)
	}
	return nil
}

// slice returns rows [lo, hi) of m without copying.
func (m Matrix) slice(lo, hi int) Matrix {
	return Matrix{Rows: hi - lo, Cols: m.Cols, Values: m.Values[lo*m.Cols : hi*m.Cols]}
}

// EncodeFloat64s returns v as little-endian IEEE-754 float64 bytes, the
// layout of mixdv1.Matrix.little_endian.
func EncodeFloat64s(v []float64) []byte {
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
	}
	return b
}

// DecodeFloat64s is the inverse of EncodeFloat64s. It fails when len(b) is
// not a multiple of 8.
func DecodeFloat64s(b []byte) ([]float64, error) {
	if len(b)%8 != 0 {
		return nil, fmt.Errorf("mixdclient: %d bytes is not a whole number of float64 values", len(b))
	}
	v := make([]float64, len(b)/8)
	for i := range v {
		v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v, nil
}

// EncodeInt32s returns v as little-endian int32 bytes, the layout of
// mixdv1.Labels.little_endian.
func EncodeInt32s(v []int32) []byte {
	b := make([]byte, 4*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint32(b[4*i:], uint32(x))
	}
	return b
}

// ToProto encodes m as a mixdv1.Matrix using the little-endian byte field.
func (m Matrix) ToProto() *mixdv1.Matrix {
	return &mixdv1.Matrix{Rows: int64(m.Rows), Cols: int64(m.Cols), LittleEndian: EncodeFloat64s(m.Values)}
}

// DecodeMatrix converts a mixdv1.Matrix, in either encoding, into a Matrix.
// It checks that the shape is non-negative, that only one encoding carries
// data, and that the payload holds exactly rows×cols values. A nil matrix
// decodes to the empty matrix.
func DecodeMatrix(pb *mixdv1.Matrix) (Matrix, error) {
	if pb == nil {
		return Matrix{}, nil
	}
	r, c := pb.GetRows(), pb.GetCols()
	if r < 0 || c < 0 {
		return Matrix{}, fmt.Errorf("mixdclient: matrix shape %d×%d is negative", r, c)
	}
	if c > 0 && r > math.MaxInt64/8/c {
		return Matrix{}, fmt.Errorf("mixdclient: matrix shape %d×%d overflows", r, c)
	}
	n := r * c
	vals, le := pb.GetValues(), pb.GetLittleEndian()
	if len(vals) > 0 && len(le) > 0 {
		return Matrix{}, errors.New("mixdclient: matrix carries both values and little_endian")
	}
	var out []float64
	switch {
	case len(le) > 0:
		if int64(len(le)) != 8*n {
			return Matrix{}, fmt.Errorf("mixdclient: matrix little_endian has %d bytes, shape %d×%d needs %d", len(le), r, c, 8*n)
		}
		var err error
		if out, err = DecodeFloat64s(le); err != nil {
			return Matrix{}, err
		}
	default:
		if int64(len(vals)) != n {
			return Matrix{}, fmt.Errorf("mixdclient: matrix values has %d entries, shape %d×%d needs %d", len(vals), r, c, n)
		}
		out = append([]float64(nil), vals...)
	}
	return Matrix{Rows: int(r), Cols: int(c), Values: out}, nil
}

// DecodeLabels converts a mixdv1.Labels, in either encoding, into ints. A
// nil Labels decodes to nil.
func DecodeLabels(pb *mixdv1.Labels) ([]int, error) {
	if pb == nil {
		return nil, nil
	}
	vals, le := pb.GetValues(), pb.GetLittleEndian()
	if len(vals) > 0 && len(le) > 0 {
		return nil, errors.New("mixdclient: labels carry both values and little_endian")
	}
	if len(le) > 0 {
		if len(le)%4 != 0 {
			return nil, fmt.Errorf("mixdclient: labels little_endian has %d bytes, not a multiple of 4", len(le))
		}
		out := make([]int, len(le)/4)
		for i := range out {
			out[i] = int(int32(binary.LittleEndian.Uint32(le[4*i:])))
		}
		return out, nil
	}
	out := make([]int, len(vals))
	for i, v := range vals {
		out[i] = int(v)
	}
	return out, nil
}

// column decodes a rows×1 matrix into a slice, checking its row count.
func column(pb *mixdv1.Matrix, field string, rows int) ([]float64, error) {
	m, err := DecodeMatrix(pb)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", field, err)
	}
	if m.Rows != rows || (rows > 0 && m.Cols != 1) {
		return nil, fmt.Errorf("mixdclient: %s has shape %d×%d, want %d×1", field, m.Rows, m.Cols, rows)
	}
	return m.Values, nil
}
