// Tuned config writer: the YAML that `nightjar tune` writes.
//
// The output is the user's config text unchanged (or nothing, without --config) with one
// `channels:` block per tuned channel appended to its `channels:` list (a list is added
// when there is none). Blocks match the channel's exact name and set only
// thresholds.false_alarms_per_day, thresholds.cusum_k, thresholds.ewma_lambda and
// anomaly_alarm.on_delay_s; later blocks override earlier ones key by key
// (config/config.h), so the file is "the user's config plus the tuned settings" and
// loads with `nightjar check-config` and `nightjar replay --config` as it is. Each block
// is preceded by a comment saying what won and why. The header names the input and the
// selection rule, never the date, so the same run writes the same bytes.
// Numbers are written in the shortest form that reads back to the same double.
// Thread-safety: pure functions. Ownership: plain values.
#pragma once

#include <string>
#include <string_view>

#include "core/status.h"
#include "replay/threshold_sweep.h"

namespace nightjar::replay {

struct TunedConfigSource {
  std::string input;        // the recording, for the header
  std::string labels;       // its labels file; empty when tuned without labels
  std::string config_path;  // the user's config file; empty when none
  std::string config_text;  // its contents
};

// InvalidArgument naming config_path and the line when the user's `channels:` is not a
// block list this writer can append to (e.g. written in flow style on one line).
core::Result<std::string> WriteTunedConfig(const TunedConfigSource& source,
                                           const SweepResult& result);

}  // namespace nightjar::replay
