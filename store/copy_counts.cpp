// CopyCounts: the per-table row counts of a sync, summed over sessions and lots.
#include "store/archive.h"

namespace ampbench::store {

CopyCounts& CopyCounts::operator+=(const CopyCounts& o) { sessions += o.sessions; instruments += o.instruments; probes += o.probes; plan_points += o.plan_points; points += o.points; fits += o.fits; lots += o.lots; devices += o.devices; return *this; }

}  // namespace ampbench::store
