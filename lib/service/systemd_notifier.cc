#include "service/systemd_notifier.h"

#include <systemd/sd-daemon.h>

#include <string>

namespace nightjar::service {

SystemdNotifier::SystemdNotifier() {
  std::uint64_t usec = 0;
  if (sd_watchdog_enabled(0, &usec) > 0) watchdog_usec_ = usec;
}

void SystemdNotifier::Ready() {
  if (ready_sent_) return;
  ready_sent_ = true;
  sd_notify(0, "READY=1");
}

void SystemdNotifier::Watchdog(std::uint64_t now_us) {
  if (watchdog_usec_ == 0) return;
  if (last_watchdog_ != 0 && now_us - last_watchdog_ < watchdog_usec_ / 2) return;
  last_watchdog_ = now_us;
  sd_notify(0, "WATCHDOG=1");
}

void SystemdNotifier::Stopping() { sd_notify(0, "STOPPING=1"); }

void SystemdNotifier::Status(std::string_view text) {
  const std::string line = "STATUS=" + std::string(text);
  sd_notify(0, line.c_str());
}

}  // namespace nightjar::service
