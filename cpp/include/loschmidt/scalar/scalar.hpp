// Umbrella header for loschmidt's scalar types: error-free transformations, double-double,
// quad-double, compensated summation and the scalar_traits that generic code uses.
#pragma once

#include "eft.hpp"
#include "double_double.hpp"
#include "quad_double.hpp"
#include "compensated.hpp"
#include "traits.hpp"
