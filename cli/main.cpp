// Entry point: hands the arguments to cli::run.
#include <iostream>
#include <string>
#include <vector>

#include "cli/app.h"

int main(int argc, char** argv) {
    std::vector<std::string> args(argv + 1, argv + argc);
    return ampbench::cli::run(args, std::cout, std::cerr);
}
