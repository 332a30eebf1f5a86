// The lot statistics against scipy: OC-curve values by scipy.stats.binom / scipy.stats.hypergeom
// and sample statistics by numpy, run through /usr/bin/python3.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "fit/lot/sampling.h"
#include "fit/lot/stats.h"
#include "core/random.h"
#include "lot_support.h"

using namespace ampbench;
using namespace ampbench::lot;
using nlohmann::json;

namespace {

json run_scipy(const json& request, const std::string& name) {
    const std::string dir = lot_test::scratch_dir(name);
    const std::string path = dir + "/request.json";
    lot_test::write_text(path, request.dump());
    const std::string out = lot_test::run_command(
        "/usr/bin/python3 " AMPBENCH_SOURCE_DIR "/tests/reference/lot_scipy_reference.py " + path);
    return json::parse(out);
}

}  // namespace

TEST_CASE("OC curve values equal scipy.stats.binom and scipy.stats.hypergeom", "[reference][lot]") {
    struct Binom {
        long n, c;
        double p;
    };
    struct Hyper {
        long lot, defectives, n, c;
    };
    std::vector<Binom> binom;
    std::vector<Hyper> hyper;
    // Plans from a handful of devices to large samples (where factorials would overflow).
    const std::vector<std::pair<long, long>> plans = {
        {5, 0}, {32, 1}, {80, 2}, {125, 3}, {315, 7}, {2000, 21}, {50000, 480}, {1000000, 10150}};
    for (const auto& [n, c] : plans) {
        for (double p : default_oc_grid()) binom.push_back({n, c, p});
        for (double p : {1e-4, 1e-3, 0.0101, 0.0103, 0.5}) binom.push_back({n, c, p});
        for (long lot : {n, n + 7, 2 * n + 1, 10 * n, std::min(1000 * n, 100000000L)}) {
            for (double p : {0.0, 0.005, 0.01, 0.02, 0.05, 0.1, 0.3}) {
                hyper.push_back({lot, lot_defectives(lot, p), n, c});
            }
        }
    }
    json request;
    for (const auto& b : binom) request["binom"].push_back({{"n", b.n}, {"c", b.c}, {"p", b.p}});
    for (const auto& h : hyper)
        request["hypergeom"].push_back(
            {{"lot", h.lot}, {"defectives", h.defectives}, {"n", h.n}, {"c", h.c}});
    const json reference = run_scipy(request, "lot-oc");
    INFO("scipy " << reference["scipy"].get<std::string>());
    REQUIRE(reference["binom"].size() == binom.size());
    REQUIRE(reference["hypergeom"].size() == hyper.size());

    double worst_binom = 0.0, worst_hyper = 0.0;
    for (size_t i = 0; i < binom.size(); ++i) {
        const double ours = accept_binomial(binom[i].n, binom[i].c, binom[i].p);
        const double theirs = reference["binom"][i].get<double>();
        INFO("binomial n=" << binom[i].n << " c=" << binom[i].c << " p=" << binom[i].p);
        // Source: scipy.stats.binom.cdf; the acceptance asks for agreement to 1e-9.
        CHECK(std::fabs(ours - theirs) <= 1e-9);
        worst_binom = std::max(worst_binom, std::fabs(ours - theirs));
    }
    for (size_t i = 0; i < hyper.size(); ++i) {
        const auto& h = hyper[i];
        const double ours = accept_hypergeometric(h.lot, h.defectives, h.n, h.c);
        const double theirs = reference["hypergeom"][i].get<double>();
        INFO("hypergeometric N=" << h.lot << " D=" << h.defectives << " n=" << h.n << " c=" << h.c);
        // Source: scipy.stats.hypergeom.cdf; agreement to 1e-9.
        CHECK(std::fabs(ours - theirs) <= 1e-9);
        worst_hyper = std::max(worst_hyper, std::fabs(ours - theirs));
    }
    // Beyond N ~ 1e8 scipy 1.10's hypergeom.cdf drifts (2.8e-9 at N = 1e9, D = 1e7, n = 1e6,
    // c = 10150); there the reference is the exact term ratio summed in 50-digit decimals.
    const std::vector<Hyper> huge = {{1000000000, 10000000, 1000000, 10150},
                                     {1000000000, 5000000, 1000000, 5000},
                                     {400000000, 4000000, 200000, 1990}};
    json exact_request;
    for (const auto& h : huge)
        exact_request["hypergeom_exact"].push_back(
            {{"lot", h.lot}, {"defectives", h.defectives}, {"n", h.n}, {"c", h.c}});
    const json exact = run_scipy(exact_request, "lot-oc-exact");
    REQUIRE(exact["hypergeom_exact"].size() == huge.size());
    for (size_t i = 0; i < huge.size(); ++i) {
        const auto& h = huge[i];
        INFO("hypergeometric N=" << h.lot << " D=" << h.defectives << " n=" << h.n << " c=" << h.c);
        // Source: the hypergeometric law's term ratio, summed exactly (not our code's method).
        CHECK(std::fabs(accept_hypergeometric(h.lot, h.defectives, h.n, h.c) -
                        exact["hypergeom_exact"][i].get<double>()) <= 1e-12);
    }
    WARN("largest difference from scipy: binomial " << worst_binom << ", hypergeometric "
                                                    << worst_hyper);
}

TEST_CASE("lot statistics equal numpy's", "[reference][lot]") {
    std::vector<std::vector<double>> sets;
    Random rng(2611);
    for (int size : {2, 3, 32, 125, 2000}) {
        std::vector<double> values;
        for (int i = 0; i < size; ++i) values.push_back(rng.normal(210.0, 35.0));
        sets.push_back(values);
    }
    sets.push_back({0.651, 0.652, 0.650, 0.655, 0.649});
    json request;
    request["summary"] = sets;
    const json reference = run_scipy(request, "lot-stats");
    REQUIRE(reference["summary"].size() == sets.size());
    for (size_t i = 0; i < sets.size(); ++i) {
        const Summary s = summarize(sets[i]);
        const json& r = reference["summary"][i];
        // Source: numpy mean and std(ddof=1) (the sample standard deviation).
        CHECK(s.mean == Approx(r["mean"].get<double>()).epsilon(1e-13));
        CHECK(*s.sd == Approx(r["sd"].get<double>()).epsilon(1e-11));
        CHECK(s.min == r["min"].get<double>());
        CHECK(s.max == r["max"].get<double>());
    }
}
