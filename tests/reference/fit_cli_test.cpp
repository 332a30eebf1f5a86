// `ampbench fit` end to end: an ngspice board response as CSV and as an archived session, fitted
// by the command, with the JSON keys of the issue and the corners checked against ngspice.
#include <catch2/catch.hpp>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <unistd.h>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "cli/app.h"
#include "core/random.h"
#include "fit/response/rational_model.h"
#include "fit_support.h"
#include "store/archive.h"

using namespace ampbench;
using namespace ampbench::fit::testing;

namespace {

struct Run {
    int code;
    std::string out, err;
};

Run run_cli(const std::vector<std::string>& args) {
    std::ostringstream out, err;
    const int code = cli::run(args, out, err);
    return {code, out.str(), err.str()};
}

std::filesystem::path scratch(const std::string& name) {
    const auto dir = std::filesystem::temp_directory_path() / fmt::format("ampbench-fitcli-{}", getpid());
    std::filesystem::create_directories(dir);
    return dir / name;
}

}  // namespace

TEST_CASE("ampbench fit --csv --json reports the ngspice corners with intervals", "[reference][cli]") {
    const std::vector<SpiceResponse> sim = simulate_boards({CeBoard{}}, 100, 1.0, 2e7, "fitcli");
    const TrueCorners truth = true_corners(sim[0]);
    Random rng(8);
    const auto csv = scratch("board.csv");
    {
        std::ofstream f(csv);
        f << "# HVE-PA1 PA1-2611-0042, simulated\nfreq_hz,gain_db,phase_deg,gain_db_sd,phase_deg_sd\n";
        // Written high to low frequency: the reader sorts.
        for (std::size_t i = sim[0].freq_hz.size(); i-- > 0;)
            if (i % 10 == 0)
                f << fmt::format("{:.10g},{:.10g},{:.10g},0.05,0.3\n", sim[0].freq_hz[i],
                                 sim[0].gain_db[i] + rng.normal(0, 0.05),
                                 fit::wrap_deg(sim[0].phase_deg[i] + rng.normal(0, 0.3)));
    }
    const Run r = run_cli({"fit", "--csv", csv.string(), "--model", "rational:2,2", "--json"});
    INFO(r.err);
    REQUIRE(r.code == 0);
    const nlohmann::json j = nlohmann::json::parse(r.out);
    for (const char* key : {"status", "usable", "model", "midband_gain_db", "midband_gain_db_ci", "midband_freq_hz",
                            "peaking_db", "inverting", "f_low_hz", "f_low_hz_ci", "f_high_hz", "f_high_hz_ci",
                            "beta_eff", "beta_eff_ci", "beta_eff_bf", "beta_verdict", "chi2_reduced"})
        CHECK(j.contains(key));
    CHECK(j["status"] == "converged");
    CHECK(j["usable"] == true);
    CHECK(j["model"] == "rational:2,2");
    CHECK(j["inverting"] == true);
    CHECK(j["beta_verdict"] == "not requested");
    // Source: ngspice AC analysis of the same board (-3 dB points of a 100-point/decade sweep).
    CHECK(j["midband_gain_db"].get<double>() == Approx(truth.peak_db).margin(0.05));
    CHECK(j["f_low_hz"].get<double>() == Approx(truth.f_low).epsilon(0.03));
    CHECK(j["f_high_hz"].get<double>() == Approx(truth.f_high).epsilon(0.03));
    CHECK(j["f_low_hz_ci"][0].get<double>() < j["f_low_hz"].get<double>());
    CHECK(j["f_high_hz_ci"][1].get<double>() > j["f_high_hz"].get<double>());

    const Run human = run_cli({"fit", "--csv", csv.string()});
    CHECK(human.code == 0);
    CHECK(human.out.find("chosen by BIC") != std::string::npos);

    // The same points in an archived session; the fit is stored with it.
    const auto db = scratch("archive.sqlite");
    std::filesystem::remove(db);
    std::int64_t session_id = 0;
    {
        auto archive = store::open_archive(db.string());
        store::NewSession ns;
        ns.board_serial = "PA1-2611-0042";
        std::vector<store::Point> points;
        for (std::size_t i = 0; i < sim[0].freq_hz.size(); i += 10) {
            store::Point p;
            p.freq_hz = sim[0].freq_hz[i];
            p.gain_db = sim[0].gain_db[i] + rng.normal(0, 0.05);
            p.gain_db_sd = 0.05;
            p.phase_deg = fit::wrap_deg(sim[0].phase_deg[i] + rng.normal(0, 0.3));
            p.phase_deg_sd = 0.3;
            points.push_back(p);
        }
        session_id = archive->import_session(ns, points).id;
    }
    const Run s = run_cli({"--db", db.string(), "fit", std::to_string(session_id), "--model", "rational:2,2", "--json"});
    INFO(s.err);
    REQUIRE(s.code == 0);
    const nlohmann::json js = nlohmann::json::parse(s.out);
    CHECK(js["f_low_hz"].get<double>() == Approx(truth.f_low).epsilon(0.03));
    {
        auto archive = store::open_archive(db.string());
        const auto fits = archive->fits(session_id);
        REQUIRE(fits.size() == 1);
        CHECK(fits[0].model == "rational:2,2");
        REQUIRE(fits[0].f_high_hz.has_value());
        CHECK(*fits[0].f_high_hz == Approx(js["f_high_hz"].get<double>()));
    }
    std::filesystem::remove_all(csv.parent_path());
}

TEST_CASE("ampbench fit refuses bad input with one line and the fit-input exit code", "[cli]") {
    const auto csv = scratch("bad.csv");
    std::ofstream(csv) << "freq_hz,gain_db,phase_deg\n100,20,-180\n100,20,-179\n";
    const Run r = run_cli({"fit", "--csv", csv.string()});
    CHECK(r.code == 5);
    CHECK(r.err.find("appears more than once") != std::string::npos);
    CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
    std::ofstream(csv) << "freq_hz,gain_db,phase_deg\n100,20,-180\n1e3,x,-179\n";
    const Run bad_number = run_cli({"fit", "--csv", csv.string()});
    CHECK(bad_number.code == 2);
    CHECK(bad_number.err.find("line 3") != std::string::npos);
    const Run neither = run_cli({"fit"});
    CHECK(neither.code == 1);
    std::filesystem::remove_all(csv.parent_path());
}
