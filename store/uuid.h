// Random (version 4) UUIDs, so rows written at different bench stations never collide when
// their archives are merged.
#pragma once

#include <string>

namespace ampbench::store {

// "xxxxxxxx-xxxx-4xxx-yxxx-xxxxxxxxxxxx" (RFC 4122 §4.4) from OpenSSL's random source.
std::string make_uuid_v4();

}  // namespace ampbench::store
