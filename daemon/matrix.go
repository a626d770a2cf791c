package daemon

import (
	"encoding/binary"
	"math"
	"slices"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// invalidf returns an INVALID_ARGUMENT status error.
func invalidf(format string, args ...any) error {
	return status.Errorf(codes.InvalidArgument, format, args...)
}

// exhaustedf returns a RESOURCE_EXHAUSTED status error.
func exhaustedf(format string, args ...any) error {
	return status.Errorf(codes.ResourceExhausted, format, args...)
}

// matrix is a decoded, validated mixdv1.Matrix.
type matrix struct {
	rows, cols int
	values     []float64
	// littleEndian records the request's encoding (for
	// MATRIX_ENCODING_UNSPECIFIED responses).
	littleEndian bool
}

// rowLimit is a bound on rows with the serve flag that raises it.
type rowLimit struct {
	max  int64
	flag string
}

// decodeMatrix validates and decodes m. field names the matrix in error
// messages ("rows", "chunk.data"); maxRows bounds its rows and maxCols its
// columns. A nil matrix is an empty one. All values must be finite; the
// error names the row and column of the first one that is not.
func decodeMatrix(field string, m *mixdv1.Matrix, maxRows rowLimit, maxCols int64) (matrix, error) {
	out, err := matrixShape(field, m, maxRows, maxCols)
	if err != nil || out.rows == 0 {
		return out, err
	}
	if !out.littleEndian {
		// The request's own slice: no copy.
		if err := checkFiniteValues(field, m.GetValues(), out.cols); err != nil {
			return matrix{}, err
		}
		out.values = m.GetValues()
		return out, nil
	}
	out.values, err = appendMatrixValues(make([]float64, 0, out.rows*out.cols), field, m, out)
	if err != nil {
		return matrix{}, err
	}
	return out, nil
}

// matrixShape validates m's dimensions, limits and encoding (as
// decodeMatrix does) without decoding its values: the result has rows,
// cols and littleEndian set and no values.
func matrixShape(field string, m *mixdv1.Matrix, maxRows rowLimit, maxCols int64) (matrix, error) {
	if m == nil {
		return matrix{}, nil
	}
	rows, cols := m.GetRows(), m.GetCols()
	if rows < 0 {
		return matrix{}, invalidf("%s.rows is %d, must not be negative", field, rows)
	}
	if cols < 0 {
		return matrix{}, invalidf("%s.cols is %d, must not be negative", field, cols)
	}
	nv, nb := len(m.GetValues()), len(m.GetLittleEndian())
	if nv > 0 && nb > 0 {
		return matrix{}, invalidf("%s: both values and little_endian are set; send exactly one", field)
	}
	if rows > maxRows.max {
		return matrix{}, exhaustedf("%s.rows is %d, above the limit of %d rows (mixd serve %s)", field, rows, maxRows.max, maxRows.flag)
	}
	if cols > maxCols {
		return matrix{}, exhaustedf("%s.cols is %d, above the limit of %d columns (mixd serve --max-dimension)", field, cols, maxCols)
	}
	if rows > 0 && cols == 0 {
		return matrix{}, invalidf("%s.cols is 0 but %s.rows is %d: every row needs at least one column", field, field, rows)
	}
	n := rows * cols // both bounded above: no overflow
	if nb > 0 {
		if int64(nb) != n*8 {
			return matrix{}, invalidf("%s.little_endian has %d bytes, want rows*cols*8 = %d*%d*8 = %d", field, nb, rows, cols, n*8)
		}
	} else if int64(nv) != n {
		return matrix{}, invalidf("%s.values has %d values, want rows*cols = %d*%d = %d", field, nv, rows, cols, n)
	}
	return matrix{rows: int(rows), cols: int(cols), littleEndian: nb > 0}, nil
}

// appendMatrixValues appends the values of m, whose shape matrixShape
// returned, to dst, checking that each is finite. Decoding straight into
// the destination keeps a large upload from holding a second copy of each
// chunk. On error dst may hold part of m.
func appendMatrixValues(dst []float64, field string, m *mixdv1.Matrix, shape matrix) ([]float64, error) {
	if !shape.littleEndian {
		if err := checkFiniteValues(field, m.GetValues(), shape.cols); err != nil {
			return dst, err
		}
		return append(dst, m.GetValues()...), nil
	}
	b := m.GetLittleEndian()
	start := len(dst)
	dst = slices.Grow(dst, len(b)/8)[:start+len(b)/8]
	out := dst[start:]
	for i := range out {
		v := math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
		if v-v != 0 {
			return dst[:start+i], nonFinite(field, i, shape.cols, v)
		}
		out[i] = v
	}
	return dst, nil
}

// checkFiniteValues returns the error for the first value of v (a matrix of cols
// columns) that is not finite.
func checkFiniteValues(field string, v []float64, cols int) error {
	for i, x := range v {
		if x-x != 0 {
			return nonFinite(field, i, cols, x)
		}
	}
	return nil
}

func nonFinite(field string, i, cols int, v float64) error {
	return invalidf("%s: value at row %d, column %d is %v; values must be finite", field, i/cols, i%cols, v)
}

// encodeMatrix builds a Matrix of rows×cols values in the chosen encoding.
func encodeMatrix(rows, cols int, v []float64, littleEndian bool) *mixdv1.Matrix {
	m := &mixdv1.Matrix{Rows: int64(rows), Cols: int64(cols)}
	if len(v) == 0 {
		return m
	}
	if littleEndian {
		b := make([]byte, 8*len(v))
		for i, x := range v {
			binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
		}
		m.LittleEndian = b
	} else {
		m.Values = v
	}
	return m
}

// encodeLabels builds Labels in the chosen encoding.
func encodeLabels(l []int, littleEndian bool) *mixdv1.Labels {
	out := &mixdv1.Labels{}
	if len(l) == 0 {
		return out
	}
	if littleEndian {
		b := make([]byte, 4*len(l))
		for i, x := range l {
			binary.LittleEndian.PutUint32(b[4*i:], uint32(int32(x)))
		}
		out.LittleEndian = b
	} else {
		v := make([]int32, len(l))
		for i, x := range l {
			v[i] = int32(x)
		}
		out.Values = v
	}
	return out
}

// decodeLabels validates and decodes labels: exactly n of them, each in [0, k).
func decodeLabels(field string, l *mixdv1.Labels, n int, k int) ([]int, error) {
	nv, nb := len(l.GetValues()), len(l.GetLittleEndian())
	if nv > 0 && nb > 0 {
		return nil, invalidf("%s: both values and little_endian are set; send exactly one", field)
	}
	out := make([]int, n)
	switch {
	case nb > 0:
		if nb != 4*n {
			return nil, invalidf("%s.little_endian has %d bytes, want 4 per row = %d", field, nb, 4*n)
		}
		for i := range out {
			out[i] = int(int32(binary.LittleEndian.Uint32(l.GetLittleEndian()[4*i:])))
		}
	default:
		if nv != n {
			return nil, invalidf("%s.values has %d labels, want one per row = %d", field, nv, n)
		}
		for i, x := range l.GetValues() {
			out[i] = int(x)
		}
	}
	for i, x := range out {
		if x < 0 || x >= k {
			return nil, invalidf("%s: label of row %d is %d, want a component index in [0, %d)", field, i, x, k)
		}
	}
	return out, nil
}

// responseEncoding resolves a requested encoding: UNSPECIFIED follows the
// input (inputLittleEndian). Unknown values are rejected.
func responseEncoding(field string, e mixdv1.MatrixEncoding, inputLittleEndian bool) (bool, error) {
	switch e {
	case mixdv1.MatrixEncoding_MATRIX_ENCODING_UNSPECIFIED:
		return inputLittleEndian, nil
	case mixdv1.MatrixEncoding_MATRIX_ENCODING_PACKED:
		return false, nil
	case mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN:
		return true, nil
	}
	return false, invalidf("%s: unknown encoding %d", field, int32(e))
}

// checkResponseSize refuses a response whose payload would exceed the
// message limit.
func checkResponseSize(bytes int64, limit int, what, instead string) error {
	// Leave 1 KiB for framing and the small fields.
	if bytes > int64(limit)-1024 {
		return exhaustedf("%s would need about %d bytes, above the message limit of %d bytes (mixd serve --max-message-bytes); %s",
			what, bytes, limit, instead)
	}
	return nil
}

// statusf returns a status error with the given code.
func statusf(c codes.Code, format string, args ...any) error {
	return status.Errorf(c, format, args...)
}
