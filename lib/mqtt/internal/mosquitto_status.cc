#include "mqtt/internal/mosquitto_status.h"

#include <mosquitto.h>

#include <string>

namespace nightjar::mqtt::internal {

core::Status MosquittoStatus(int rc, std::string_view context) {
  if (rc == MOSQ_ERR_SUCCESS) return core::Status::Ok();
  std::string message = std::string(context) + ": " + mosquitto_strerror(rc);
  switch (rc) {
    case MOSQ_ERR_INVAL:
    case MOSQ_ERR_PAYLOAD_SIZE:
    case MOSQ_ERR_MALFORMED_UTF8:
    case MOSQ_ERR_OVERSIZE_PACKET:
    case MOSQ_ERR_QOS_NOT_SUPPORTED:
    case MOSQ_ERR_NOT_SUPPORTED:
      return core::Status::InvalidArgument(std::move(message));
    case MOSQ_ERR_NO_CONN:
    case MOSQ_ERR_CONN_REFUSED:
    case MOSQ_ERR_CONN_LOST:
    case MOSQ_ERR_ERRNO:
    case MOSQ_ERR_EAI:
    case MOSQ_ERR_LOOKUP:
    case MOSQ_ERR_KEEPALIVE:
    case MOSQ_ERR_TIMEOUT:
    case MOSQ_ERR_PROXY:
    case MOSQ_ERR_TLS:
    case MOSQ_ERR_TLS_HANDSHAKE:
      return core::Status::Unavailable(std::move(message));
    case MOSQ_ERR_AUTH:
    case MOSQ_ERR_ACL_DENIED:
      return core::Status::FailedPrecondition(std::move(message));
    default:
      return core::Status::Internal(std::move(message));
  }
}

}  // namespace nightjar::mqtt::internal
