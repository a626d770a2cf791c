package pbconv_test

import (
	"fmt"

	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// A message with a mean of the wrong length is rejected with the field named.
func ExampleParamsFromProto() {
	pb := &mixdv1.Parameters{
		Dimension:           2,
		FeatureNames:        []string{"flow", "vibration"},
		Family:              mixdv1.Family_FAMILY_GAUSSIAN,
		CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL,
		Components: []*mixdv1.Component{
			{Weight: 1, Mean: []float64{40.5}, Covariance: []float64{4, 0, 0, 0.25}},
		},
	}
	_, err := pbconv.ParamsFromProto(pb)
	fmt.Println(err)
	pb.Components[0].Mean = append(pb.Components[0].Mean, 0.8)
	p, err := pbconv.ParamsFromProto(pb)
	fmt.Println(p.Family, p.Structure, p.Components[0].Mean, err)
	// Output:
	// parameters.components[0].mean: has 1 values, want dimension = 2
	// gaussian diagonal [40.5 0.8] <nil>
}
