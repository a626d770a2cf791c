package daemon

import (
	"encoding/binary"
	"math"
	"slices"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

func le(v ...float64) []byte {
	b := make([]byte, 8*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(x))
	}
	return b
}

func TestDecodeMatrix(t *testing.T) {
	lim := rowLimit{4, "--max-rows"}
	cases := []struct {
		name     string
		m        *mixdv1.Matrix
		code     codes.Code
		msg      string
		rows     int
		values   []float64
		isLittle bool
	}{
		{name: "nil is empty", m: nil},
		{name: "zero rows with cols", m: &mixdv1.Matrix{Cols: 3}},
		{name: "packed", m: &mixdv1.Matrix{Rows: 2, Cols: 2, Values: []float64{1, 2, 3, 4}}, rows: 2, values: []float64{1, 2, 3, 4}},
		{name: "little endian", m: &mixdv1.Matrix{Rows: 1, Cols: 3, LittleEndian: le(1.5, -2, 1e300)}, rows: 1, values: []float64{1.5, -2, 1e300}, isLittle: true},
		{name: "negative rows", m: &mixdv1.Matrix{Rows: -1, Cols: 2}, code: codes.InvalidArgument, msg: "rows.rows is -1"},
		{name: "negative cols", m: &mixdv1.Matrix{Rows: 1, Cols: -2}, code: codes.InvalidArgument, msg: "rows.cols is -2"},
		{name: "both payloads", m: &mixdv1.Matrix{Rows: 1, Cols: 1, Values: []float64{1}, LittleEndian: le(1)}, code: codes.InvalidArgument, msg: "both values and little_endian"},
		{name: "too many rows", m: &mixdv1.Matrix{Rows: 5, Cols: 1, Values: make([]float64, 5)}, code: codes.ResourceExhausted, msg: "limit of 4 rows (mixd serve --max-rows)"},
		{name: "too many cols", m: &mixdv1.Matrix{Rows: 1, Cols: 9, Values: make([]float64, 9)}, code: codes.ResourceExhausted, msg: "limit of 8 columns"},
		{name: "rows without cols", m: &mixdv1.Matrix{Rows: 2}, code: codes.InvalidArgument, msg: "rows.cols is 0 but rows.rows is 2"},
		{name: "short values", m: &mixdv1.Matrix{Rows: 2, Cols: 2, Values: []float64{1, 2, 3}}, code: codes.InvalidArgument, msg: "rows.values has 3 values, want rows*cols = 2*2 = 4"},
		{name: "missing payload", m: &mixdv1.Matrix{Rows: 1, Cols: 2}, code: codes.InvalidArgument, msg: "rows.values has 0 values"},
		{name: "short bytes", m: &mixdv1.Matrix{Rows: 1, Cols: 2, LittleEndian: le(1)[:7]}, code: codes.InvalidArgument, msg: "rows.little_endian has 7 bytes, want rows*cols*8 = 1*2*8 = 16"},
		{name: "payload on empty", m: &mixdv1.Matrix{Rows: 0, Cols: 2, Values: []float64{1}}, code: codes.InvalidArgument, msg: "rows.values has 1 values, want rows*cols = 0*2 = 0"},
		{name: "NaN packed", m: &mixdv1.Matrix{Rows: 2, Cols: 2, Values: []float64{1, 2, math.NaN(), 4}}, code: codes.InvalidArgument, msg: "value at row 1, column 0 is NaN"},
		{name: "Inf bytes", m: &mixdv1.Matrix{Rows: 2, Cols: 2, LittleEndian: le(1, 2, 3, math.Inf(-1))}, code: codes.InvalidArgument, msg: "value at row 1, column 1 is -Inf"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got, err := decodeMatrix("rows", c.m, lim, 8)
			if c.code != codes.OK {
				if status.Code(err) != c.code || !strings.Contains(status.Convert(err).Message(), c.msg) {
					t.Fatalf("error = %v, want %s containing %q", err, c.code, c.msg)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if got.rows != c.rows || !slices.Equal(got.values, c.values) || got.littleEndian != c.isLittle {
				t.Fatalf("got %+v, want rows %d values %v little %v", got, c.rows, c.values, c.isLittle)
			}
		})
	}
}

func TestEncodeMatrixRoundTrip(t *testing.T) {
	v := []float64{1, -0.5, math.MaxFloat64, math.SmallestNonzeroFloat64, 0, -3}
	for _, little := range []bool{false, true} {
		m := encodeMatrix(3, 2, v, little)
		if little != (len(m.LittleEndian) > 0) || little == (len(m.Values) > 0) {
			t.Fatalf("little=%v: wrong payload field: %v", little, m)
		}
		got, err := decodeMatrix("m", m, rowLimit{10, "x"}, 10)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(got.values, v) {
			t.Fatalf("little=%v: round trip %v != %v", little, got.values, v)
		}
	}
}

func TestLabels(t *testing.T) {
	for _, little := range []bool{false, true} {
		l := encodeLabels([]int{0, 2, 1}, little)
		got, err := decodeLabels("labels", l, 3, 3)
		if err != nil || !slices.Equal(got, []int{0, 2, 1}) {
			t.Fatalf("little=%v: %v %v", little, got, err)
		}
	}
	cases := []struct {
		name string
		l    *mixdv1.Labels
		msg  string
	}{
		{"count", &mixdv1.Labels{Values: []int32{0, 1}}, "labels.values has 2 labels, want one per row = 3"},
		{"bytes", &mixdv1.Labels{LittleEndian: make([]byte, 8)}, "labels.little_endian has 8 bytes, want 4 per row = 12"},
		{"range", &mixdv1.Labels{Values: []int32{0, 3, 1}}, "label of row 1 is 3, want a component index in [0, 3)"},
		{"negative", &mixdv1.Labels{Values: []int32{0, 1, -1}}, "label of row 2 is -1"},
		{"both", &mixdv1.Labels{Values: []int32{0, 1, 1}, LittleEndian: make([]byte, 12)}, "both values and little_endian"},
	}
	for _, c := range cases {
		_, err := decodeLabels("labels", c.l, 3, 3)
		if status.Code(err) != codes.InvalidArgument || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("%s: error %v, want INVALID_ARGUMENT containing %q", c.name, err, c.msg)
		}
	}
}

func TestResponseEncoding(t *testing.T) {
	for _, c := range []struct {
		e       mixdv1.MatrixEncoding
		inputLE bool
		want    bool
	}{
		{mixdv1.MatrixEncoding_MATRIX_ENCODING_UNSPECIFIED, false, false},
		{mixdv1.MatrixEncoding_MATRIX_ENCODING_UNSPECIFIED, true, true},
		{mixdv1.MatrixEncoding_MATRIX_ENCODING_PACKED, true, false},
		{mixdv1.MatrixEncoding_MATRIX_ENCODING_LITTLE_ENDIAN, false, true},
	} {
		got, err := responseEncoding("e", c.e, c.inputLE)
		if err != nil || got != c.want {
			t.Errorf("%v input LE %v: got %v, %v", c.e, c.inputLE, got, err)
		}
	}
	if _, err := responseEncoding("response_encoding", 9, false); status.Code(err) != codes.InvalidArgument {
		t.Errorf("unknown encoding: %v", err)
	}
}

// FuzzDecodeMatrix checks that any matrix either decodes to exactly
// rows×cols finite values or is refused with INVALID_ARGUMENT or
// RESOURCE_EXHAUSTED, and never panics.
func FuzzDecodeMatrix(f *testing.F) {
	f.Add(int64(2), int64(2), le(1, 2, 3, 4), false)
	f.Add(int64(1), int64(2), le(1, math.NaN()), true)
	f.Add(int64(-1), int64(0), []byte{}, false)
	f.Add(int64(3), int64(1), le(1, 2), true)
	f.Add(int64(1<<40), int64(1<<40), []byte{1}, true)
	f.Fuzz(func(t *testing.T, rows, cols int64, payload []byte, packed bool) {
		m := &mixdv1.Matrix{Rows: rows, Cols: cols}
		if packed {
			for i := 0; i+8 <= len(payload); i += 8 {
				m.Values = append(m.Values, math.Float64frombits(binary.LittleEndian.Uint64(payload[i:])))
			}
		} else {
			m.LittleEndian = payload
		}
		got, err := decodeMatrix("rows", m, rowLimit{1000, "--max-rows"}, 64)
		// The upload's path (shape, then values appended in place after
		// earlier rows) must accept and refuse exactly the same.
		prefix := []float64{-1, -2}
		shape, aerr := matrixShape("rows", m, rowLimit{1000, "--max-rows"}, 64)
		var appended []float64
		if aerr == nil {
			appended, aerr = appendMatrixValues(slices.Clone(prefix), "rows", m, shape)
		}
		if (err == nil) != (aerr == nil) || (err != nil && err.Error() != aerr.Error()) {
			t.Fatalf("decodeMatrix: %v; matrixShape + appendMatrixValues: %v", err, aerr)
		}
		if err != nil {
			if c := status.Code(err); c != codes.InvalidArgument && c != codes.ResourceExhausted {
				t.Fatalf("code %s: %v", c, err)
			}
			return
		}
		if !slices.Equal(appended[:2], prefix) || !slices.Equal(appended[2:], got.values) {
			t.Fatalf("appended %v after %v, decoded %v", appended[2:], prefix, got.values)
		}
		if int64(got.rows) != rows || int64(got.cols) != cols || len(got.values) != got.rows*got.cols {
			t.Fatalf("decoded %d×%d with %d values from %d×%d", got.rows, got.cols, len(got.values), rows, cols)
		}
		for _, v := range got.values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("non-finite value %v accepted", v)
			}
		}
	})
}
