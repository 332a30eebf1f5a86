// A lot's verdict against its (n, c) plan, its statistics and the plan's operating
// characteristic, from the devices in the archive; as JSON and as a self-contained HTML report.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "fit/lot/lot_plan.h"
#include "fit/lot/sampling.h"
#include "fit/lot/stats.h"
#include "store/archive.h"

namespace ampbench::procedures {

struct QuantityStats {
    std::string name;  // "hfe", "vbe_v"
    std::optional<lot::Summary> summary;
    std::optional<double> cpk;
    lot::Limits limits;
};

struct LotVerdict {
    store::Lot lot;
    lot::LotPlan plan;
    long tested = 0, defectives = 0, skipped = 0;
    std::string verdict;  // "accept", "reject", "incomplete"
    QuantityStats hfe, vbe;
    // The test conditions as measured: mean I_C and V_CE of the tested devices.
    std::optional<double> mean_ic_a, mean_vce_v;
    double estimated_defective = 0.0;  // defectives / tested (0 with none tested)
    double accept_at_estimate_binomial = 0.0;
    std::optional<double> accept_at_estimate_hypergeometric;
    std::vector<lot::OcPoint> oc;
    std::vector<store::Device> devices;
};

// reject as soon as defectives exceed c (even before n are tested), accept with n tested and at
// most c defectives, else incomplete.
std::string verdict_word(long n, long c, long tested, long defectives);

LotVerdict lot_verdict(const store::Lot& lot, const std::vector<store::Device>& devices);

// At least {"lot","n","c","tested","defectives","verdict","stats":{"hfe":{...}},"oc":[...]}.
std::string verdict_json(const LotVerdict& v);

// The self-contained report: hFE histogram with the spec limits, OC curve, device table, verdict,
// test conditions and the jig's calibration date; every text escaped.
std::string lot_report_html(const LotVerdict& v);

}  // namespace ampbench::procedures
