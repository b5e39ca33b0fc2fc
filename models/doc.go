// Package models holds kinetic networks: continuous-time Markov chains on
// named states whose edges carry two directed rates (units 1/time) and,
// on some directions, visible labels with a detection probability.
//
// Two edges may join the same pair of states (parallel edges: a mechanical
// step and a futile slip, a visible step and a hidden channel beside it,
// the two halves of a two-state periodic scheme). Each is its own channel
// with its own rates and labels; the generator adds their rates. A cycle
// is then a list of edge steps, not of states: a parallel pair closes a
// cycle of two states, the basis has |E| - |V| + 1 cycles as for any
// graph, and an affinity constraint whose state list crosses a parallel
// pair names the edge of every step (AffinitySpec.Edges, edges = [...] in
// a spec).
//
// Properties of a network with numeric rates:
//
//   - stationary law pi (pi L = 0, sum pi = 1) by the Grassmann-Taksar-Heyman
//     reduction, accurate to high relative precision for stiff networks;
//   - edge currents J_e = pi_a w_ab - pi_b w_ba;
//   - a fundamental cycle basis from a breadth-first spanning tree, each
//     cycle with affinity A_C = ln(prod forward rates / prod backward rates)
//     in k_B T;
//   - the entropy production rate sigma = sum_e J_e ln(w_ab / w_ba)
//     = sum_C J_C A_C >= 0 (Schnakenberg, Rev. Mod. Phys. 48, 571 (1976));
//   - a detailed-balance test (every cycle affinity zero, Kolmogorov).
//
// The package never prints; it returns values and errors.
package models
