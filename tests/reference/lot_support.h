// Helpers the lot reference tests share: a scratch directory and running an outside program.
#pragma once

#include <string>

namespace ampbench::lot_test {

// A fresh directory under the build tree for one test's files.
std::string scratch_dir(const std::string& name);

// Runs a shell command, returns its stdout; FAILs the test on a non-zero exit.
std::string run_command(const std::string& command);

void write_text(const std::string& path, const std::string& text);

}  // namespace ampbench::lot_test
