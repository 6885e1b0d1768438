// TemplateMatcher: recognises an expected event (a pump start, a back-flush) in one
// channel's samples by the shape of its last `m` values.
//
// The template is a shape in engineering units. Each new sample, the window of the last
// m samples is z-normalised and compared with the z-normalised template by DTW with a
// Sakoe-Chiba band (core/dtw.h); LB_Keogh prunes most windows in O(m) before the O(m*band)
// DTW runs. The distance is reported per sample, sqrt(D/m): for two aligned shapes it
// equals sqrt(2 (1 - r)) with r their correlation (Rakthanmanon et al. 2012), so a limit
// of 0.5 asks for r >= 0.875 after the best warping. Windows whose spread is far below the
// template's are skipped, since a z-normalised near-flat window can take any shape.
// After a match the matcher stays quiet for one template length (one event, one alert).
// Buffers are allocated at construction; Add() does not allocate.
// Thread-safety: none; owned by one channel.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "core/status.h"

namespace nightjar::core {

struct EventTemplate {
  // Name shown in event alerts, e.g. "pump_start".
  std::string name;
  // The expected shape, engineering units, one value per sample (>= 4 values).
  std::vector<double> shape;
  // Sakoe-Chiba band in samples; negative means 10 % of the length (at least 1).
  int band = -1;
  // Largest per-sample DTW distance that counts as a match (see above). Default 0.5.
  double max_distance = 0.5;
  // A window is considered only if its spread is at least this fraction of the
  // template's spread. Default 0.5.
  double min_spread_ratio = 0.5;
};

// OK, or InvalidArgument naming the field (e.g. "shape: needs at least 4 values").
Status ValidateEventTemplate(const EventTemplate& event_template);

struct TemplateMatch {
  double distance = 0.0;    // per-sample DTW distance of the matching window
  std::int64_t length = 0;  // template length m: the event spans the last m samples
};

class TemplateMatcher {
 public:
  // The template must be valid (asserted).
  explicit TemplateMatcher(const EventTemplate& event_template);

  const std::string& name() const { return name_; }
  std::int64_t length() const { return static_cast<std::int64_t>(template_.size()); }

  // Adds the newest sample; a match when the window ending here matches and no match was
  // reported in the last `length()` samples.
  std::optional<TemplateMatch> Add(double value);
  // Forgets the window (after a data gap).
  void Reset();

  // Heap bytes owned (template, envelope, window and scratch).
  std::size_t MemoryBytes() const;

  // Per-sample distance of the last window examined (+inf if it was skipped or pruned).
  double last_distance() const { return last_distance_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  std::string name_;
  std::vector<double> template_;  // z-normalised
  std::vector<double> upper_;
  std::vector<double> lower_;
  std::vector<double> window_;  // ring of raw samples
  std::vector<double> normalised_;
  std::vector<double> rows_;  // DTW scratch
  int band_;
  double max_distance_;
  double min_spread_;
  std::size_t next_ = 0;
  std::size_t filled_ = 0;
  std::int64_t quiet_ = 0;  // samples left before another match may be reported
  double last_distance_;
};

}  // namespace nightjar::core
