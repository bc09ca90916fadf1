// Starting values for the fit, from closed-form linear regressions.
//
// Well above Is the model is V = a·ln I + b + Rs·I with a = n·Vt and
// b = −n·Vt·ln Is: linear in (a, b, Rs). One weighted linear least-squares
// solve on all points gives n and Is (the log-linear region pins a and b) and
// Rs (the high-current deviation from the straight line pins it) together.
// A second solve drops readings far from the first (a robust trim, so one
// glitch does not drag the start). If Rs comes out negative the line is refit
// with Rs = 0; if n is outside its bounds, the log-linear fit of the lower
// half of the currents is used instead.
#pragma once

#include "fitting/extract.hpp"

#include <span>

namespace junco::fitting {

// points: forward readings above the noise floor (I > 0, V > 0), at least 3.
// sigma_v: per-point voltage uncertainty used as the regression weight.
DiodeParams initial_estimate(std::span<const IvPoint> points, std::span<const double> sigma_v, double temp_k,
                             bool fit_shunt);

}  // namespace junco::fitting
