// Adding up the rows copied by several copy_session / copy_lot calls.
#include "store/archive.h"

namespace ampbench::store {

CopyCounts& CopyCounts::operator+=(const CopyCounts& o) { sessions += o.sessions; instruments += o.instruments; probes += o.probes; plan_points += o.plan_points; points += o.points; fits += o.fits; lots += o.lots; devices += o.devices; return *this; }

}  // namespace ampbench::store
