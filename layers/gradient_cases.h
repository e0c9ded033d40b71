// Gradient checks for every layer (float64, first and second order), run by
// `spar check-gradients` and the tests beside the engine's own operation checks.
#pragma once

#include <vector>

#include "engine/gradient_check.h"

namespace spar {

std::vector<GradientCase> layer_gradient_cases();

}  // namespace spar
