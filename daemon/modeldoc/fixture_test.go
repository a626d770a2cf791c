package modeldoc

import (
	"time"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
	"google.golang.org/protobuf/types/known/durationpb"
	"google.golang.org/protobuf/types/known/timestamppb"
)

// pumpModel is a two-component Gaussian model of a water pumping station:
// flow (litres per second), motor current (amperes) and vibration velocity
// (millimetres per second). Component 0 is normal running, component 1 the
// low-flow, high-current regime of a worn impeller. The numbers are our own.
func pumpModel() *mixdv1.Model {
	return &mixdv1.Model{
		Name:       "models/pump-station-3",
		Version:    4,
		CreateTime: timestamppb.New(time.Date(2026, 3, 14, 6, 30, 0, 250_000_000, time.UTC)),
		Parameters: &mixdv1.Parameters{
			Dimension:           3,
			FeatureNames:        []string{"flow_lps", "motor_current_a", "vibration_mm_s"},
			Family:              mixdv1.Family_FAMILY_GAUSSIAN,
			CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
			Components: []*mixdv1.Component{
				{
					Weight: 0.7125,
					Mean:   []float64{42.5, 18.2, 2.1},
					Covariance: []float64{
						4.0, 1.2, 0.1,
						1.2, 0.9, 0.05,
						0.1, 0.05, 0.16,
					},
				},
				{
					Weight: 0.2875,
					Mean:   []float64{35.1, 21.7, 4.8},
					Covariance: []float64{
						9.0, -1.5, 0.6,
						-1.5, 1.6, 0.2,
						0.6, 0.2, 0.81,
					},
				},
			},
		},
		Report: &mixdv1.FitReport{
			Fitter:        "em",
			FitterVersion: "0.1.0",
			Settings: map[string]string{
				"components": "2", "max_iterations": "200", "restarts": "4",
				"tolerance": "1e-06", "ridge": "1e-06",
			},
			Seed:          20260314,
			Iterations:    5,
			Converged:     true,
			Objective:     "log_likelihood",
			LogLikelihood: -10234.567890123,
			Bic:           20576.9,
			Aic:           20507.135780246,
			Elapsed:       durationpb.New(183_400_000 * time.Nanosecond),
			TrainingRows:  2000,
			History:       []float64{-11890.25, -10502.125, -10251.0078125, -10234.6, -10234.567890123},
			Notes:         []string{"rows 1811-1815 repeat row 1810 exactly"},
			TrainingQuantiles: &mixdv1.DensityQuantiles{
				Levels:       []float64{0.001, 0.01, 0.05, 0.5},
				LogDensities: []float64{-14.75, -11.2, -8.9, -5.125},
			},
		},
	}
}

// robustModel is a Student-t model with diagonal scale matrices, no version,
// creation time or fit report: the shape of a hand-made model for import.
func robustModel() *mixdv1.Model {
	return &mixdv1.Model{
		Name: "models/pump-station-3-robust",
		Parameters: &mixdv1.Parameters{
			Dimension:           2,
			Family:              mixdv1.Family_FAMILY_STUDENT_T,
			CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL,
			Components: []*mixdv1.Component{
				{Weight: 0.5, Mean: []float64{40, 18.5}, Covariance: []float64{5, 0, 0, 1.1}, DegreesOfFreedom: 4.5},
				{Weight: 0.5, Mean: []float64{30, 22}, Covariance: []float64{8, 0, 0, 2}, DegreesOfFreedom: 1e6},
			},
		},
	}
}

// smallModel is a K=2, D=2 Gaussian model whose numbers depend on v.
func smallModel(v float64) *mixdv1.Model {
	return &mixdv1.Model{
		Name: "models/small",
		Parameters: &mixdv1.Parameters{
			Dimension:           2,
			Family:              mixdv1.Family_FAMILY_GAUSSIAN,
			CovarianceStructure: mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
			Components: []*mixdv1.Component{
				{Weight: 0.25, Mean: []float64{v, 1}, Covariance: []float64{2, 0.5, 0.5, 1}},
				{Weight: 0.75, Mean: []float64{-1, v}, Covariance: []float64{1, -0.25, -0.25, 3}},
			},
		},
	}
}
