// SystemdNotifier: tells systemd (Type=notify) how the daemon is doing, via sd_notify(3).
//
// Ready() sends READY=1 once; Watchdog() sends WATCHDOG=1 when systemd asked for a
// watchdog (WATCHDOG_USEC set for this process), at most every half of its interval;
// Stopping() sends STOPPING=1; Status() sends a STATUS= line. Outside systemd
// (NOTIFY_SOCKET unset) every call does nothing.
//
// Thread-safety: one owner thread. Ownership: plain value.
#pragma once

#include <cstdint>
#include <string_view>

namespace nightjar::service {

class SystemdNotifier {
 public:
  SystemdNotifier();

  void Ready();
  // `now_us`: a monotonic clock in microseconds.
  void Watchdog(std::uint64_t now_us);
  void Stopping();
  void Status(std::string_view text);

  bool watchdog_enabled() const { return watchdog_usec_ > 0; }

 private:
  std::uint64_t watchdog_usec_ = 0;
  std::uint64_t last_watchdog_ = 0;
  bool ready_sent_ = false;
};

}  // namespace nightjar::service
