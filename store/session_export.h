// A whole session as one JSON document (format "ampbench-session/1"): every reading including
// superseded ones, the plan, instrument identities and settings, probes and fits.
#pragma once

#include <string>

#include "store/archive.h"

namespace ampbench::store {

// Pretty-printed (two-space indent), newline-terminated.
std::string session_json(const SessionDetail& detail);

}  // namespace ampbench::store
