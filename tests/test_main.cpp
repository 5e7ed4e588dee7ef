// Catch2 entry point. Random tests take their seed from tests/support/seed.h, so a failing
// case can be rerun; Catch2's own --rng-seed is printed by the runner.
#define CATCH_CONFIG_MAIN
#include <catch2/catch.hpp>
