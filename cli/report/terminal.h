// Terminal and JSON renderings of a sweep's results: the gap table, the diagnosis, the fit.
#pragma once
#include <string>

#include <nlohmann/json_fwd.hpp>

#include "cli/procedures/sweep.h"

namespace ampbench::report {

// quantity | predicted | tolerance band | measured ± U | gap | verdict
std::string gap_table(const std::vector<extract::GapRow>& rows);
std::string diagnosis_text(const std::vector<extract::FaultCandidate>& candidates);
// The `fit` object as `ampbench fit --json` gives it.
nlohmann::ordered_json fit_json(const fit::ResponseFit& f);
nlohmann::ordered_json gap_json(const std::vector<extract::GapRow>& rows);
nlohmann::ordered_json diagnosis_json(const std::vector<extract::FaultCandidate>& candidates);
// How the readings were taken and which channel-match run was divided out, one line each.
std::string readings_text(const procedures::SessionAnalysis& a);
// The same as JSON: {"method": ..., "match": {"session", "taken_utc", "age_days", ...} or null}.
nlohmann::ordered_json readings_json(const procedures::SessionAnalysis& a);
// A match run's mismatch per frequency, and its largest values.
std::string match_table(const std::vector<procedures::MatchRow>& rows);
// A number with its unit in engineering form ("42.10 Hz", "33.06 dB").
std::string quantity_text(double v, const std::string& unit);

}  // namespace ampbench::report
