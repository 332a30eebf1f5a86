// The self-contained HTML report of a sweep session: Bode plots (inline SVG), gap table,
// diagnosis, DC readings, identities and calibration, the safety notice. All user text escaped.
#pragma once
#include <cstdint>
#include <string>

#include "cli/procedures/sweep.h"
#include "store/archive.h"

namespace ampbench::report {

std::string html_report(const store::SessionDetail& detail, const procedures::SessionAnalysis& analysis);

}  // namespace ampbench::report
