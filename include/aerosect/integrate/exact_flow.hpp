#pragma once
// Exact propagation of an autonomous piecewise-linear section.
//
// Eligible models: no gust input (the model's gust field is empty) and
// every nonlinear spring piecewise linear and continuous at its breakpoints
// (freeplay, bilinear, table, continuous piecewise laws). Then, with every
// spring in a fixed region r, the state equation is linear with a constant
// input:
//   x' = A_r x + c_r,   A_r = Df (the model's Jacobian in region r, 1/s
//                       per state units), c_r = f(x) - A_r x (the springs'
//                       intercepts; units of x').
// Its exact solution over a time tau is the matrix exponential of the
// augmented matrix M_r = [[A_r, c_r], [0, 0]] applied to [x; 1] (Moler and
// Van Loan, "Nineteen dubious ways to compute the exponential of a matrix,
// twenty-five years later", SIAM Review 45, 2003: the augmented form of
// method 16, a Taylor series after scaling). Here the state is first
// scaled, z = W x (W = state_weights of orbit.hpp: radians-like units), and
// the step tau of region r is chosen so that ||tau M_r||_inf <= 1/2: the
// Taylor series of exp(tau M_r) then converges to round-off in about 20
// terms, with no cancellation. No step-size control and no truncation
// error beyond round-off: the flow is exact.
//
// Events on the exact solution (same witnesses as integrator.hpp): a spring
// DOF reaching a breakpoint of its region (the region changes; the vector
// field is continuous there, so the saltation matrix is the identity and
// the monodromy needs no jump), and velocity zeros of the moving DOFs
// (peaks, reported to the observer, the trajectory unchanged). Within a
// step a witness g(tau) is an exponential polynomial with known derivative
// g'(tau) = e^T M z(tau): a sign change between the step's ends, or an
// interior extremum of g (g' changing sign, located first) beyond zero,
// brackets the first zero, which safeguarded Newton locates to
// 1e-13 max(1, |t|) s. A trajectory that touches a breakpoint inside a step
// and turns back (grazing within one step) is therefore caught.
//
// The monodromy (run.track_monodromy) is propagated with the same
// exponentials (the variational equation Phi' = A_r Phi is exact per
// region). Samples (OutputSchedule) are evaluated on the exact solution at
// their times.

#include <string>

#include "aerosect/integrate/integrator.hpp"

namespace aerosect {

// True when the model can be propagated exactly (see above); else false and
// `why` (when given) says what prevents it.
bool exact_propagation_eligible(const ModelDescription& model, std::string* why = nullptr);
bool exact_propagation_eligible(const AeroelasticModel& model, std::string* why = nullptr);

// integrate() for an eligible model (same contract: run.time/run.x hold the
// last state reached; observers as there). Throws NumericalError on a
// non-finite state or a switching loop; InternalError for an ineligible
// model.
IntegrationResult integrate_exact(const AeroelasticModel& model, RunState& run, double t_end,
                                  const OutputSchedule& schedule, const RunObservers& observers = {});

}  // namespace aerosect
