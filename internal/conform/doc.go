// Package conform is rhomb's shared conformance suite: every node, loss and
// normalization mode runs the same checks, so a new one is tested the way
// the existing ones are.
//
// Gradients are checked in float64 against central finite differences
// computed by gonum's diff/fd. The relative error ‖g − g_fd‖₂ / max(‖g‖₂,
// ‖g_fd‖₂) must stay below GradTol = 1e-6. The central formula with step h
// has truncation error O(h²·f‴) and round-off O(ε/h); with gonum's default
// step for the central formula (h = 6e-6, about ε^(1/3)) both are near 1e-11
// relative on the well-scaled inputs used here, so 1e-6 leaves five orders
// of magnitude for conditioning while still catching any wrong term (a wrong
// factor of 2 or a missing term gives errors of order 1).
package conform
