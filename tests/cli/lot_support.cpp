// Writes the lot test files (see the header).
#include "lot_support.h"

#include <nlohmann/json.hpp>

namespace ampbench::cli::testing {

LotFiles write_lot_files(const CliTempDir& dir, const std::string& sim_query,
                         const std::function<void(nlohmann::json&)>& edit) {
    const std::string data = AMPBENCH_TEST_DATA_DIR "/lot/";
    write_text(dir.path("jig-bc1.design.json"), read_text(data + "jig-bc1.design.json"));
    nlohmann::json plan = nlohmann::json::parse(read_text(data + "tray.lot-plan.json"));
    if (edit) edit(plan);
    LotFiles f;
    f.plan = dir.path("tray.lot-plan.json");
    write_text(f.plan, plan.dump(2));
    nlohmann::json bench = {
        {"format", "ampbench-bench/1"},
        {"meter", {{"uri", sim_query}, {"input_ohms", "10M"}, {"accuracy", "0.05%"},
                   {"channels", {{"101", "vcc"}, {"102", "b"}, {"103", "c"}, {"104", "e"}}}}},
        {"supply", {{"uri", sim_query}}}};
    f.bench = dir.path("tray.bench.json");
    write_text(f.bench, bench.dump(2));
    return f;
}

}  // namespace ampbench::cli::testing
