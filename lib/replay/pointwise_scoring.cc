#include "replay/pointwise_scoring.h"

#include <algorithm>
#include <cmath>

namespace nightjar::replay {

SeriesPointScorer::SeriesPointScorer(std::span<const LabelWindow> windows,
                                     const ScoringOptions& options)
    : windows_(windows.begin(), windows.end()) {
  const double grace_s = std::isnan(options.grace_s) ? ScoringOptions{}.grace_s
                                                     : std::clamp(options.grace_s, 0.0, 86'400.0);
  grace_us_ = core::FromSeconds(grace_s);
}

void SeriesPointScorer::Row(core::TimestampUs time) {
  if (pending_.has_value() && *pending_ == time) return;  // the same instant again
  if (pending_.has_value()) Judge(*pending_);
  pending_ = time;
}

void SeriesPointScorer::Edge(std::string_view channel, core::AlertPhase phase) {
  if (phase == core::AlertPhase::kRaise) {
    active_.emplace(channel);
  } else {
    active_.erase(std::string(channel));
  }
}

void SeriesPointScorer::Finish() {
  if (pending_.has_value()) Judge(*pending_);
  pending_.reset();
}

void SeriesPointScorer::Judge(core::TimestampUs time) {
  ++scores_.samples;
  bool positive = false;
  bool in_event = false;
  for (const LabelWindow& window : windows_) {
    if (window.kind == kAnomalyWindowKind && window.Contains(time)) positive = true;
    if (window.kind == kEventWindowKind && window.start <= time && time <= window.end + grace_us_) {
      in_event = true;
    }
  }
  if (!positive && in_event) {
    ++scores_.excluded;
    return;
  }
  const bool flagged = !active_.empty();
  scores_.positives += positive ? 1 : 0;
  scores_.flagged += flagged ? 1 : 0;
  scores_.true_positives += positive && flagged ? 1 : 0;
}

}  // namespace nightjar::replay
