// Reconnect delay: exponential backoff with "equal jitter".
//
//   base(n)  = min(max_s, min_s * 2^(n-1))   for n >= 1 failures in a row
//   delay(n) = base(n) * (0.5 + 0.5 * u)     with u uniform in [0, 1)
//
// so the delay lies in [base/2, base): never less than half the base (a broker that just
// came back is not hammered), and spread over half the base so that many clients that
// lost the same broker at the same moment do not all come back in the same instant.
// (Common practice; the "equal jitter" variant of exponential backoff.)
//
// Thread-safety: pure function. Ownership: none.
#pragma once

#include <algorithm>
#include <cmath>

namespace nightjar::mqtt::internal {

// `failures` >= 1 (smaller counts as 1); min_s > 0, max_s >= min_s; u in [0, 1).
inline double ReconnectDelaySeconds(int failures, double min_s, double max_s, double u) {
  const int doublings = std::clamp(failures - 1, 0, 62);
  const double base = std::min(max_s, min_s * std::ldexp(1.0, doublings));
  return base * (0.5 + 0.5 * std::clamp(u, 0.0, 1.0));
}

}  // namespace nightjar::mqtt::internal
