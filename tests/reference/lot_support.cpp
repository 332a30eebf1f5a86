// Scratch files and subprocesses for the lot reference tests (python3 with scipy, ngspice).
#include "lot_support.h"

#include <catch2/catch.hpp>

#include <array>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sys/wait.h>

namespace ampbench::lot_test {

std::string scratch_dir(const std::string& name) {
    std::filesystem::path dir = AMPBENCH_BINARY_DIR;
    dir /= "test-scratch";
    dir /= name;
    std::filesystem::remove_all(dir);
    std::filesystem::create_directories(dir);
    return dir.string();
}

std::string run_command(const std::string& command) {
    FILE* pipe = popen(command.c_str(), "r");
    REQUIRE(pipe != nullptr);
    std::string out;
    std::array<char, 4096> buffer{};
    size_t got = 0;
    while ((got = std::fread(buffer.data(), 1, buffer.size(), pipe)) > 0) out.append(buffer.data(), got);
    const int status = pclose(pipe);
    INFO(command << "\n" << out);
    REQUIRE(WIFEXITED(status));
    REQUIRE(WEXITSTATUS(status) == 0);
    return out;
}

void write_text(const std::string& path, const std::string& text) {
    std::ofstream f(path, std::ios::binary);
    f << text;
    REQUIRE(f.good());
}

}  // namespace ampbench::lot_test
