// Checkpoints of one channel: everything a ChannelPipeline has learnt and is doing, as
// bytes, so that a channel restored from them continues exactly as if it had never
// stopped (same alerts, same status, bit for bit).
//
// Covered: LSTM weights, Adam moments and step count, the training ring and recurrent
// state, input scaler, learning progress, sample-period estimate, residual scale and
// variance-inflation estimates, chart sums and designed thresholds, sensor-health runs,
// every alarm's state (an alarm active at the checkpoint is still active after it, not
// cleared and re-raised), template-matcher windows and the status counters. Not covered:
// options (they come from the config again) and the engine's clock.
//
// Layout (all little-endian; lib/state/FORMAT.md has the byte table): magic "NJST",
// format version, options fingerprint, channel name, body length, body, CRC-32 of all
// bytes before it. Decoding checks, in this order: framing (truncated), magic and CRC
// (corrupt), version, channel name, fingerprint (a changed config is a mismatch, not
// corruption), then the body, whose every index and size is range-checked so that even
// a file with a valid CRC but nonsense inside is refused, never trusted.
//
// Pure computation: no I/O. Thread-safety: none beyond the pipeline's own (read it on
// the thread that owns it). Ownership: callers own the byte vectors and pipelines.
#pragma once

#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/channel_pipeline.h"
#include "core/engine_options.h"
#include "core/status.h"

namespace nightjar::core {

inline constexpr std::uint32_t kChannelStateVersion = 6;
inline constexpr std::uint32_t kMaxChannelNameBytes = 4096;

// Why a checkpoint was not loaded.
enum class StateProblem {
  kNone,
  kTruncated,        // shorter than its framing says
  kCorrupt,          // not a checkpoint, CRC mismatch, or nonsense inside
  kVersionMismatch,  // written by another format version
  kChannelMismatch,  // holds another channel's state
  kOptionsMismatch,  // written under options that shape the model differently
};
const char* StateProblemName(StateProblem problem);

// Hash (FNV-1a, 64 bit) of the options that shape a channel's state: forecaster,
// time-of-day features, model size, window and training schedule, scaler, warm-up,
// residual and threshold options, configured sample period and event templates. Alarm
// timing, priorities, sensor limits and the unit are not in it: changing them keeps
// the learnt model.
std::uint64_t OptionsFingerprint(const ChannelOptions& options);

// Appends the checkpoint of `pipeline` to `out`.
void EncodeChannelState(const ChannelPipeline& pipeline, std::vector<std::uint8_t>& out);

// The channel name in a checkpoint's header after checking its framing and CRC (not the
// version, options or body); on failure *problem says why (if not null).
Result<std::string> PeekChannelName(std::span<const std::uint8_t> bytes,
                                    StateProblem* problem = nullptr);

// Restores `pipeline` (built from the current options under its name) from a checkpoint. On
// failure *problem says why (if not null), the message says where, and the pipeline is
// left half-written: callers decode into a fresh pipeline and keep it only on success.
Status DecodeChannelState(std::span<const std::uint8_t> bytes, ChannelPipeline& pipeline,
                          StateProblem* problem = nullptr);

}  // namespace nightjar::core
