package picture_test

import (
	"fmt"
	"math"

	"github.com/mixd-dev/mixd/fitters/mixture/picture"
)

// The 2-sigma ellipse of an axis-aligned component with variances 4 and 1
// reaches 2·2 = 4 to either side horizontally and 2·1 = 2 vertically.
func ExampleEllipse() {
	pts, err := picture.Ellipse([2]float64{20, 30}, [4]float64{4, 0, 0, 1}, 2)
	if err != nil {
		fmt.Println(err)
		return
	}
	minX, maxX, minY, maxY := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	for _, p := range pts {
		minX, maxX = math.Min(minX, p.X), math.Max(maxX, p.X)
		minY, maxY = math.Min(minY, p.Y), math.Max(maxY, p.Y)
	}
	fmt.Printf("x from %.1f to %.1f, y from %.1f to %.1f\n", minX, maxX, minY, maxY)
	// Output: x from 16.0 to 24.0, y from 28.0 to 32.0
}
