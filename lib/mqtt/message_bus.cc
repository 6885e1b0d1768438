// Out-of-line destructor: anchors MessageBus's vtable here and proves the header
// compiles on its own.
#include "mqtt/message_bus.h"

namespace nightjar::mqtt {

MessageBus::~MessageBus() = default;

}  // namespace nightjar::mqtt
