package mixdclient

import (
	"bytes"
	"math"
	"slices"
	"strings"
	"testing"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

func TestFloat64sRoundTrip(t *testing.T) {
	tests := []struct {
		name string
		in   []float64
	}{
		{"empty", nil},
		{"one", []float64{1.5}},
		{"signs and zeros", []float64{0, math.Copysign(0, -1), -2.25, 3e300}},
		{"extremes", []float64{math.SmallestNonzeroFloat64, math.MaxFloat64, -math.MaxFloat64, math.Inf(1), math.Inf(-1)}},
		{"nan payload", []float64{math.Float64frombits(0x7ff8000000000123)}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b := EncodeFloat64s(tt.in)
			if len(b) != 8*len(tt.in) {
				t.Fatalf("encoded %d values into %d bytes", len(tt.in), len(b))
			}
			out, err := DecodeFloat64s(b)
			if err != nil {
				t.Fatal(err)
			}
			if len(out) != len(tt.in) {
				t.Fatalf("decoded %d values, want %d", len(out), len(tt.in))
			}
			for i := range out {
				if math.Float64bits(out[i]) != math.Float64bits(tt.in[i]) {
					t.Errorf("value %d: bits %x, want %x", i, math.Float64bits(out[i]), math.Float64bits(tt.in[i]))
				}
			}
		})
	}
}

// TestFloat64sLayout pins the byte layout to IEEE-754 binary64,
// little-endian: 1.0 is 0x3FF0000000000000 (IEEE 754-2019, common practice).
func TestFloat64sLayout(t *testing.T) {
	got := EncodeFloat64s([]float64{1, -2})
	want := []byte{0, 0, 0, 0, 0, 0, 0xf0, 0x3f, 0, 0, 0, 0, 0, 0, 0, 0xc0}
	if !bytes.Equal(got, want) {
		t.Fatalf("EncodeFloat64s(1, -2) = % x, want % x", got, want)
	}
	if _, err := DecodeFloat64s(make([]byte, 9)); err == nil {
		t.Fatal("DecodeFloat64s accepted 9 bytes")
	}
}

func TestInt32sLayout(t *testing.T) {
	got := EncodeInt32s([]int32{1, -1, 258})
	want := []byte{1, 0, 0, 0, 0xff, 0xff, 0xff, 0xff, 2, 1, 0, 0}
	if !bytes.Equal(got, want) {
		t.Fatalf("EncodeInt32s = % x, want % x", got, want)
	}
	labels, err := DecodeLabels(&mixdv1.Labels{LittleEndian: got})
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(labels, []int{1, -1, 258}) {
		t.Fatalf("DecodeLabels = %v", labels)
	}
}

func TestDecodeMatrix(t *testing.T) {
	le := EncodeFloat64s([]float64{1, 2, 3, 4, 5, 6})
	tests := []struct {
		name    string
		in      *mixdv1.Matrix
		want    Matrix
		wantErr string
	}{
		{name: "nil", in: nil, want: Matrix{}},
		{name: "empty", in: &mixdv1.Matrix{Rows: 0, Cols: 3}, want: Matrix{Rows: 0, Cols: 3, Values: []float64{}}},
		{name: "packed", in: &mixdv1.Matrix{Rows: 2, Cols: 3, Values: []float64{1, 2, 3, 4, 5, 6}},
			want: Matrix{Rows: 2, Cols: 3, Values: []float64{1, 2, 3, 4, 5, 6}}},
		{name: "little endian", in: &mixdv1.Matrix{Rows: 3, Cols: 2, LittleEndian: le},
			want: Matrix{Rows: 3, Cols: 2, Values: []float64{1, 2, 3, 4, 5, 6}}},
		{name: "negative rows", in: &mixdv1.Matrix{Rows: -1, Cols: 2}, wantErr: "negative"},
		{name: "negative cols", in: &mixdv1.Matrix{Rows: 1, Cols: -2}, wantErr: "negative"},
		{name: "both encodings", in: &mixdv1.Matrix{Rows: 1, Cols: 1, Values: []float64{1}, LittleEndian: le[:8]}, wantErr: "both"},
		{name: "short packed", in: &mixdv1.Matrix{Rows: 2, Cols: 3, Values: []float64{1, 2}}, wantErr: "values has 2 entries"},
		{name: "short bytes", in: &mixdv1.Matrix{Rows: 2, Cols: 3, LittleEndian: le[:40]}, wantErr: "little_endian has 40 bytes"},
		{name: "ragged bytes", in: &mixdv1.Matrix{Rows: 1, Cols: 1, LittleEndian: le[:7]}, wantErr: "7 bytes"},
		{name: "overflow", in: &mixdv1.Matrix{Rows: math.MaxInt64 / 2, Cols: 4}, wantErr: "overflows"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := DecodeMatrix(tt.in)
			if tt.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
					t.Fatalf("err = %v, want one containing %q", err, tt.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if got.Rows != tt.want.Rows || got.Cols != tt.want.Cols || !slices.Equal(got.Values, tt.want.Values) {
				t.Fatalf("got %+v, want %+v", got, tt.want)
			}
		})
	}
}

func TestMatrixToProtoRoundTrip(t *testing.T) {
	m := Matrix{Rows: 2, Cols: 2, Values: []float64{0.1, -0.2, 1e-300, 7}}
	got, err := DecodeMatrix(m.ToProto())
	if err != nil {
		t.Fatal(err)
	}
	if got.Rows != 2 || got.Cols != 2 || !slices.Equal(got.Values, m.Values) {
		t.Fatalf("round trip gave %+v", got)
	}
}

func TestFromRows(t *testing.T) {
	m, err := FromRows([][]float64{{1, 2}, {3, 4}, {5, 6}})
	if err != nil {
		t.Fatal(err)
	}
	if m.Rows != 3 || m.Cols != 2 || !slices.Equal(m.Row(2), []float64{5, 6}) {
		t.Fatalf("FromRows gave %+v", m)
	}
	if _, err := FromRows([][]float64{{1, 2}, {3}}); err == nil || !strings.Contains(err.Error(), "row 1") {
		t.Fatalf("ragged rows: err = %v, want one naming row 1", err)
	}
}

func TestMatrixCheck(t *testing.T) {
	if err := (Matrix{Rows: 2, Cols: 2, Values: []float64{1, 2, 3}}).check("rows"); err == nil ||
		!strings.Contains(err.Error(), "rows: 3 values for shape 2×2") {
		t.Fatalf("check = %v", err)
	}
	if err := (Matrix{Rows: -1, Cols: 2}).check("rows"); err == nil {
		t.Fatal("check accepted a negative shape")
	}
}

func TestChunkSizes(t *testing.T) {
	tests := []struct {
		n, step int
		want    []int
	}{
		{0, 5, nil},
		{5, 5, []int{5}},
		{6, 5, []int{5, 1}},
		{11, 3, []int{3, 3, 3, 2}},
	}
	for _, tt := range tests {
		if got := chunkSizes(tt.n, tt.step); !slices.Equal(got, tt.want) {
			t.Errorf("chunkSizes(%d, %d) = %v, want %v", tt.n, tt.step, got, tt.want)
		}
	}
}

func TestNormalizeTarget(t *testing.T) {
	tests := []struct {
		in, want string
		bad      bool
	}{
		{in: "127.0.0.1:7313", want: "passthrough:///127.0.0.1:7313"},
		{in: " localhost:1 ", want: "passthrough:///localhost:1"},
		{in: "unix:/tmp/mixd.sock", want: "unix:/tmp/mixd.sock"},
		{in: "unix:///tmp/mixd.sock", want: "unix:///tmp/mixd.sock"},
		{in: "dns:///example:1", want: "dns:///example:1"},
		{in: "", bad: true},
		{in: "unix:", bad: true},
	}
	for _, tt := range tests {
		got, err := normalizeTarget(tt.in)
		if tt.bad {
			if err == nil {
				t.Errorf("normalizeTarget(%q) accepted", tt.in)
			}
			continue
		}
		if err != nil || got != tt.want {
			t.Errorf("normalizeTarget(%q) = %q, %v; want %q", tt.in, got, err, tt.want)
		}
	}
}

func FuzzDecodeMatrix(f *testing.F) {
	f.Add(int64(2), int64(3), EncodeFloat64s([]float64{1, 2, 3, 4, 5, 6}), []byte(nil))
	f.Add(int64(1), int64(1), []byte{1, 2, 3}, []byte(nil))
	f.Add(int64(1), int64(2), []byte(nil), EncodeFloat64s([]float64{1, 2}))
	f.Add(int64(-1), int64(0), []byte(nil), []byte(nil))
	f.Add(int64(math.MaxInt64), int64(math.MaxInt64), []byte(nil), []byte(nil))
	f.Fuzz(func(t *testing.T, rows, cols int64, le, packed []byte) {
		var vals []float64
		if len(packed)%8 == 0 {
			vals, _ = DecodeFloat64s(packed)
		}
		pb := &mixdv1.Matrix{Rows: rows, Cols: cols, LittleEndian: le, Values: vals}
		m, err := DecodeMatrix(pb)
		if err != nil {
			return
		}
		if int64(m.Rows) != rows || int64(m.Cols) != cols || len(m.Values) != m.Rows*m.Cols {
			t.Fatalf("accepted %d×%d with %d values", m.Rows, m.Cols, len(m.Values))
		}
		if len(le) > 0 && !bytes.Equal(EncodeFloat64s(m.Values), le) {
			t.Fatal("re-encoding does not give the input bytes")
		}
		if err := m.check("fuzz"); err != nil {
			t.Fatalf("decoded matrix fails its own check: %v", err)
		}
	})
}

func FuzzDecodeLabels(f *testing.F) {
	f.Add([]byte{1, 0, 0, 0}, []byte(nil))
	f.Add([]byte{1, 0, 0}, []byte{5})
	f.Fuzz(func(t *testing.T, le, packed []byte) {
		vals := make([]int32, len(packed))
		for i, b := range packed {
			vals[i] = int32(int8(b))
		}
		got, err := DecodeLabels(&mixdv1.Labels{LittleEndian: le, Values: vals})
		if err != nil {
			return
		}
		switch {
		case len(le) > 0:
			back := make([]int32, len(got))
			for i, v := range got {
				back[i] = int32(v)
			}
			if !bytes.Equal(EncodeInt32s(back), le) {
				t.Fatal("re-encoding does not give the input bytes")
			}
		case len(got) != len(vals):
			t.Fatalf("decoded %d labels from %d values", len(got), len(vals))
		}
	})
}
