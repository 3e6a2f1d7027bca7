package exact_test

import (
	"fmt"
	"math"

	"soakfarm/solver/exact"
)

// The first eigenvalue and coefficient of a plane wall at Bi = 1; Table 5.1
// of Incropera et al., 6th ed. (from memory) prints 0.8603 and 1.1191.
func ExampleOneTerm() {
	lambda1, c1, err := exact.OneTerm(exact.PlaneWall, 1)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("λ1 = %.4f, C1 = %.4f\n", lambda1, c1)
	// Output: λ1 = 0.8603, C1 = 1.1191
}

// A hand estimate for a small part: if Bi is well below 0.1 the part is
// nearly isothermal and θ = exp(−t/τ); after one time constant θ = 1/e.
func ExampleLumpedConvection() {
	const radius, h, k = 0.004, 20.0, 45.0 // m, W/(m²·K), W/(m·K)
	if bi := exact.Biot(h, radius/3, k); bi < 0.1 {
		tau := exact.TimeConstant(7800, 470, 4.0/3*math.Pi*radius*radius*radius, h, 4*math.Pi*radius*radius)
		fmt.Printf("Bi = %.5f, θ(τ) = %.4f\n", bi, exact.LumpedConvection(tau, tau))
	}
	// Output: Bi = 0.00059, θ(τ) = 0.3679
}
