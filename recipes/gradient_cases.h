// Gradient checks for the adversarial objectives and penalties (float64, first and second
// order), run by `spar check-gradients` beside the operations' and layers' own checks.
#pragma once

#include <vector>

#include "engine/gradient_check.h"

namespace spar {

std::vector<GradientCase> objective_gradient_cases();

}  // namespace spar
