// Shared helpers for the circuit tests: paths of the sample and test designs.
#pragma once

#include <string>

namespace ampbench::testing {

inline std::string sample_design(const std::string& stem) {
    return std::string(AMPBENCH_SOURCE_DIR) + "/sample_sessions/" + stem + ".design.json";
}
inline std::string test_design(const std::string& stem) {
    return std::string(AMPBENCH_TEST_DATA_DIR) + "/designs/" + stem + ".design.json";
}

}  // namespace ampbench::testing
