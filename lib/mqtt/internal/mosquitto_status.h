// libmosquitto error codes -> core::Status, with libmosquitto's own text.
//
// Thread-safety: pure function (mosquitto_strerror returns static text, except for
// MOSQ_ERR_ERRNO where it describes errno of the calling thread).
#pragma once

#include <string_view>

#include "core/status.h"

namespace nightjar::mqtt::internal {

// OK for MOSQ_ERR_SUCCESS; otherwise "<context>: <mosquitto_strerror(rc)>" with a code
// by kind: malformed input -> InvalidArgument; no connection, refused, lost, lookup and
// system errors -> Unavailable; authorisation -> FailedPrecondition; anything else ->
// Internal.
core::Status MosquittoStatus(int rc, std::string_view context);

}  // namespace nightjar::mqtt::internal
