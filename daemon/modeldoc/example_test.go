package modeldoc_test

import (
	"fmt"
	"os"

	"github.com/mixd-dev/mixd/daemon/modeldoc"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

func ExampleEncode() {
	// A one-feature model of a pump's motor current (amperes): idle and running.
	m := &mixdv1.Model{
		Name: "models/pump-7-current",
		Parameters: &mixdv1.Parameters{
			Dimension:           1,
			FeatureNames:        []string{"motor_current_a"},
			Family:              mixdv1.Family_FAMILY_GAUSSIAN,
			CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
			Components: []*mixdv1.Component{
				{Weight: 0.25, Mean: []float64{0.4}, Covariance: []float64{0.01}},
				{Weight: 0.75, Mean: []float64{18.6}, Covariance: []float64{1.44}},
			},
		},
	}
	b, err := modeldoc.Encode(m)
	if err != nil {
		fmt.Println(err)
		return
	}
	os.Stdout.Write(b)
	// Output:
	// {
	//   "format": "mixd-model",
	//   "format_version": 1,
	//   "name": "pump-7-current",
	//   "dimension": 1,
	//   "feature_names": ["motor_current_a"],
	//   "family": "gaussian",
	//   "covariance_structure": "full",
	//   "components": [
	//     {
	//       "weight": 0.25,
	//       "mean": [0.4],
	//       "covariance": [
	//         [0.01]
	//       ]
	//     },
	//     {
	//       "weight": 0.75,
	//       "mean": [18.6],
	//       "covariance": [
	//         [1.44]
	//       ]
	//     }
	//   ]
	// }
}

func ExampleDecode() {
	doc := []byte(`{
	  "format": "mixd-model", "format_version": 1, "name": "pump-7-current",
	  "dimension": 1, "family": "gaussian", "covariance_structure": "full",
	  "components": [
	    {"weight": 0.25, "mean": [0.4], "covariance": [[0.01]]},
	    {"weight": 0.75, "mean": [18.6], "covariance": [[1.44, 0]]}
	  ]
	}`)
	if _, err := modeldoc.Decode(doc); err != nil {
		fmt.Println(err)
	}
	// Output:
	// model document: components[1].covariance: row 0 has 2 values, want 1
}
