// ResidualTap: an optional observer of the residual each channel hands its charts.
//
// Threshold tuning (lib/replay/threshold_sweep.h) records, per channel and per charted
// sample, what ChannelPipeline gave ResidualMonitor::Observe and the few flags that decide
// how the monitor learns, so it can re-run the charts and the anomaly alarm with other
// settings without running the model again. With no tap set the pipeline pays one branch
// per sample.
// Thread-safety: a tap is called from the thread that runs the engine owning the channel.
// Ownership: the engine borrows the tap; it must outlive the engine or be unset first.
#pragma once

#include <cstdint>

#include "core/time.h"

namespace nightjar::core {

struct ResidualTapPoint {
  std::uint32_t channel = 0;  // engine ChannelId
  TimestampUs time = 0;
  double residual = 0.0;  // scaled residual as given to ResidualMonitor::Observe
  bool flatline = false;  // the sample was flat (not trusted for learning)
  // The level chart's ratio (core/level_monitor.h; 0 when off or not armed). It depends on
  // no threshold setting the sweep varies, so it is recorded, not re-run.
  double level_ratio = 0.0;
  // Learning-phase milestones reached just after this sample's Observe, in that order.
  bool tail_window_started = false;  // ResidualMonitor::StartTailWindow was called
  bool armed = false;                // ResidualMonitor::Arm was called
  double sample_period_s = 0.0;      // the period the thresholds were designed for (with armed)
  // The anomaly alarm was not updated for this sample (armed, in the hold after a resume;
  // the charts were).
  bool alarm_held = false;
  // The hold ended with this sample at the learnt operating point: the charts were zeroed
  // after it.
  bool charts_reset = false;
  // The hold ended at a new operating point: the channel dropped its scales and learns
  // again (ResumeOptions) from the next sample.
  bool relearned = false;
};

class ResidualTap {
 public:
  virtual ~ResidualTap() = default;
  virtual void OnResidual(const ResidualTapPoint& point) = 0;
  // The channel dropped its scales between samples, with its asset (ChannelPipeline::
  // RelearnWithAsset), and learns again from its next sample.
  virtual void OnRelearn(std::uint32_t /*channel*/) {}
};

}  // namespace nightjar::core
