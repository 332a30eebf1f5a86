// The rules every backend's copy_session / copy_lot and the sync command share for records
// that exist on both sides: when the copy being pushed carries a newer status.
#pragma once

#include <string>

#include "store/archive.h"

namespace ampbench::store {

// True when `from` has got further than the copy here (status `here`, finished `here_finished`):
// running < interrupted < complete or aborted, and at the same status a later finished time.
// A session resumed and completed at the destination is never moved back by an older copy.
bool session_status_is_newer(const Session& from, SessionStatus here,
                             const std::string& here_finished);

// True when a lot's status `from` should replace `here`: a verdict (accepted, rejected) is not
// taken back by an older copy of the lot that was still open.
bool lot_status_is_newer(const std::string& from, const std::string& here);

}  // namespace ampbench::store
