// The one Catch2 main of the test suite; every test executable links it.
#define CATCH_CONFIG_MAIN
#include <catch2/catch.hpp>
