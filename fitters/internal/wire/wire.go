// Package wire holds the conversions between the mixture model types and
// their protocol-buffer messages, and the little-endian byte encodings used
// for bulk numeric data. It exists so that both the plugin glue in package
// fitters and the public conversion package fitters/pbconv can share one
// implementation without an import cycle; outside code uses fitters/pbconv.
package wire

import (
	"encoding/binary"
	"fmt"
	"math"

	"github.com/mixd-dev/mixd/fitters/mixture"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// FamilyToProto maps a family to its enum value. The zero Family ("not set")
// maps to FAMILY_UNSPECIFIED; an unknown value is passed through unchanged so
// the receiving side rejects it rather than silently changing it.
func FamilyToProto(f mixture.Family) mixdv1.Family {
	switch f {
	case 0:
		return mixdv1.Family_FAMILY_UNSPECIFIED
	case mixture.Gaussian:
		return mixdv1.Family_FAMILY_GAUSSIAN
	case mixture.StudentT:
		return mixdv1.Family_FAMILY_STUDENT_T
	}
	return mixdv1.Family(clamp32(int(f)))
}

// FamilyFromProto maps an enum value to a family; FAMILY_UNSPECIFIED gives the
// zero Family. field names the field in the error for an unknown value.
func FamilyFromProto(f mixdv1.Family, field string) (mixture.Family, error) {
	switch f {
	case mixdv1.Family_FAMILY_UNSPECIFIED:
		return 0, nil
	case mixdv1.Family_FAMILY_GAUSSIAN:
		return mixture.Gaussian, nil
	case mixdv1.Family_FAMILY_STUDENT_T:
		return mixture.StudentT, nil
	}
	return 0, fmt.Errorf("%s: unknown family value %d", field, int32(f))
}

// StructureToProto maps a covariance structure to its enum value, like FamilyToProto.
func StructureToProto(s mixture.Structure) mixdv1.CovarianceStructure {
	switch s {
	case 0:
		return mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_UNSPECIFIED
	case mixture.Full:
		return mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL
	case mixture.Diagonal:
		return mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL
	case mixture.Spherical:
		return mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_SPHERICAL
	case mixture.Tied:
		return mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED
	}
	return mixdv1.CovarianceStructure(clamp32(int(s)))
}

// StructureFromProto maps an enum value to a covariance structure, like FamilyFromProto.
func StructureFromProto(s mixdv1.CovarianceStructure, field string) (mixture.Structure, error) {
	switch s {
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_UNSPECIFIED:
		return 0, nil
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL:
		return mixture.Full, nil
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL:
		return mixture.Diagonal, nil
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_SPHERICAL:
		return mixture.Spherical, nil
	case mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED:
		return mixture.Tied, nil
	}
	return 0, fmt.Errorf("%s: unknown covariance structure value %d", field, int32(s))
}

// ParamsToProto converts p to its message. Slices are copied.
func ParamsToProto(p mixture.Params) *mixdv1.Parameters {
	pb := &mixdv1.Parameters{
		Dimension:           clamp32(p.Dim),
		FeatureNames:        append([]string(nil), p.Features...),
		Family:              FamilyToProto(p.Family),
		CovarianceStructure: StructureToProto(p.Structure),
		Components:          make([]*mixdv1.Component, len(p.Components)),
	}
	for i, c := range p.Components {
		pb.Components[i] = &mixdv1.Component{
			Weight:           c.Weight,
			Mean:             append([]float64(nil), c.Mean...),
			Covariance:       append([]float64(nil), c.Cov...),
			DegreesOfFreedom: c.DF,
		}
	}
	return pb
}

// ParamsFromProto converts a message to Params, checking its shape: a
// dimension of at least 1, feature names empty or one unique non-empty name
// per dimension, a known family and structure, at least one component, mean
// and covariance lengths matching the dimension, and finite numbers
// everywhere. It does not check the mathematics (weights summing to 1,
// positive-definite matrices); mixture validation does that. Errors name the
// offending field with the given prefix, e.g. "parameters.components[2].mean[0]".
func ParamsFromProto(pb *mixdv1.Parameters, field string) (mixture.Params, error) {
	if pb == nil {
		return mixture.Params{}, fmt.Errorf("%s: missing", field)
	}
	dim := int(pb.GetDimension())
	if dim < 1 {
		return mixture.Params{}, fmt.Errorf("%s.dimension: must be at least 1, got %d", field, dim)
	}
	p := mixture.Params{Dim: dim}
	if n := len(pb.GetFeatureNames()); n > 0 {
		if n != dim {
			return mixture.Params{}, fmt.Errorf("%s.feature_names: has %d names, want 0 or dimension = %d", field, n, dim)
		}
		seen := make(map[string]int, n)
		for i, name := range pb.GetFeatureNames() {
			if name == "" {
				return mixture.Params{}, fmt.Errorf("%s.feature_names[%d]: empty name", field, i)
			}
			if j, dup := seen[name]; dup {
				return mixture.Params{}, fmt.Errorf("%s.feature_names[%d]: %q repeats feature_names[%d]", field, i, name, j)
			}
			seen[name] = i
		}
		p.Features = append([]string(nil), pb.GetFeatureNames()...)
	}
	var err error
	if p.Family, err = FamilyFromProto(pb.GetFamily(), field+".family"); err != nil {
		return mixture.Params{}, err
	}
	if p.Family == 0 {
		return mixture.Params{}, fmt.Errorf("%s.family: not set", field)
	}
	if p.Structure, err = StructureFromProto(pb.GetCovarianceStructure(), field+".covariance_structure"); err != nil {
		return mixture.Params{}, err
	}
	if p.Structure == 0 {
		return mixture.Params{}, fmt.Errorf("%s.covariance_structure: not set", field)
	}
	if len(pb.GetComponents()) == 0 {
		return mixture.Params{}, fmt.Errorf("%s.components: at least one component is required", field)
	}
	p.Components = make([]mixture.Component, len(pb.GetComponents()))
	for k, c := range pb.GetComponents() {
		cf := fmt.Sprintf("%s.components[%d]", field, k)
		if c == nil {
			return mixture.Params{}, fmt.Errorf("%s: missing", cf)
		}
		if err := finite(cf+".weight", c.GetWeight()); err != nil {
			return mixture.Params{}, err
		}
		if err := finite(cf+".degrees_of_freedom", c.GetDegreesOfFreedom()); err != nil {
			return mixture.Params{}, err
		}
		if n := len(c.GetMean()); n != dim {
			return mixture.Params{}, fmt.Errorf("%s.mean: has %d values, want dimension = %d", cf, n, dim)
		}
		if n := len(c.GetCovariance()); int64(n) != int64(dim)*int64(dim) {
			return mixture.Params{}, fmt.Errorf("%s.covariance: has %d values, want dimension² = %d", cf, n, int64(dim)*int64(dim))
		}
		if err := finiteAll(cf+".mean", c.GetMean()); err != nil {
			return mixture.Params{}, err
		}
		if err := finiteAll(cf+".covariance", c.GetCovariance()); err != nil {
			return mixture.Params{}, err
		}
		p.Components[k] = mixture.Component{
			Weight: c.GetWeight(),
			Mean:   append([]float64(nil), c.GetMean()...),
			Cov:    append([]float64(nil), c.GetCovariance()...),
			DF:     c.GetDegreesOfFreedom(),
		}
	}
	return p, nil
}

func finite(field string, v float64) error {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Errorf("%s: not a finite number (%v)", field, v)
	}
	return nil
}

func finiteAll(field string, vs []float64) error {
	for i, v := range vs {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s[%d]: not a finite number (%v)", field, i, v)
		}
	}
	return nil
}

// clamp32 converts n to int32, saturating at the int32 limits.
func clamp32(n int) int32 {
	switch {
	case n > math.MaxInt32:
		return math.MaxInt32
	case n < math.MinInt32:
		return math.MinInt32
	}
	return int32(n)
}

// AppendFloat64s appends the little-endian IEEE-754 encoding of vs to b.
func AppendFloat64s(b []byte, vs []float64) []byte {
	for _, v := range vs {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
	}
	return b
}

// DecodeFloat64s decodes little-endian float64 values from b into dst, which
// must have exactly len(b)/8 elements; field names b in the error.
func DecodeFloat64s(dst []float64, b []byte, field string) error {
	if len(b) != 8*len(dst) {
		return fmt.Errorf("%s: has %d bytes, want %d (8 per value × %d values)", field, len(b), 8*len(dst), len(dst))
	}
	for i := range dst {
		dst[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return nil
}

// AppendInt32s appends the little-endian encoding of vs to b.
func AppendInt32s(b []byte, vs []int32) []byte {
	for _, v := range vs {
		b = binary.LittleEndian.AppendUint32(b, uint32(v))
	}
	return b
}

// DecodeInt32s decodes little-endian int32 values from b into dst, which must
// have exactly len(b)/4 elements; field names b in the error.
func DecodeInt32s(dst []int32, b []byte, field string) error {
	if len(b) != 4*len(dst) {
		return fmt.Errorf("%s: has %d bytes, want %d (4 per value × %d values)", field, len(b), 4*len(dst), len(dst))
	}
	for i := range dst {
		dst[i] = int32(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return nil
}
