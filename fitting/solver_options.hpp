// The Ceres settings every small fit here uses (forward fit, joint AC+DC,
// AC alone, junction capacitance): a handful of parameters, tight
// tolerances, single-threaded and silent. Internal to fitting/ (Ceres is a
// private dependency of the library).
#pragma once

#include <ceres/ceres.h>

namespace junco::fitting {

ceres::Solver::Options solver_options(int max_iterations);

}  // namespace junco::fitting
