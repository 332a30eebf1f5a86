// The software version recorded with every session and printed in reports.
#pragma once

namespace ampbench {
const char* software_version();
}
