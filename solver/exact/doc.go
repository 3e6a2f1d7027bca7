// Package exact holds exact solutions of transient conduction: the series
// solutions for a plane wall, an infinite cylinder and a sphere cooled or
// heated by a fluid, their one-term approximation, the product solutions
// for a rectangular block and a short cylinder, the semi-infinite solid with
// surface convection, and lumped capacitance with convection or radiation.
// The solver's tests compare against these, and they give hand estimates.
//
// All quantities are SI; temperatures in the radiation formulas are kelvin.
//
// Sources of the formulas (chapter and section numbers from memory):
//
//   - Series solutions with convection, their eigenvalue equations and
//     coefficients, the energy fractions and the one-term approximation:
//     Incropera, DeWitt, Bergman and Lavine, Fundamentals of Heat and Mass
//     Transfer, 6th ed., sections 5.5 and 5.6 and Table 5.1; Çengel and
//     Ghajar, Heat and Mass Transfer, 5th ed., section 4-2 and Table 4-2.
//   - Product solutions for the block and the short cylinder and their
//     energy fractions: Incropera 6th ed., section 5.8; Çengel and Ghajar
//     5th ed., section 4-4.
//   - Semi-infinite solid with surface convection: Incropera 6th ed.,
//     section 5.7, case 3; Çengel and Ghajar 5th ed., section 4-3.
//   - Lumped capacitance with convection (time constant) and with radiation
//     only (the closed form with a logarithm and an arctangent): Incropera
//     6th ed., sections 5.2 and 5.3.
//   - Asymptotic zeros of J0 and J1 (McMahon's expansion): Abramowitz and
//     Stegun, Handbook of Mathematical Functions, 9.5.12. Power series and
//     asymptotic series of exp(x²)·erfc(x): Abramowitz and Stegun 7.1.8 and
//     7.1.23.
//   - Short-time form of the plane wall (two independent semi-infinite
//     solids, one from each face): Carslaw and Jaeger, Conduction of Heat in
//     Solids, 2nd ed., chapter 2 (semi-infinite solid) and chapter 3 (slab).
package exact
