#include "core/alert.h"

namespace nightjar::core {

const char* AlertKindName(AlertKind kind) {
  switch (kind) {
    case AlertKind::kAnomaly:
      return "anomaly";
    case AlertKind::kEvent:
      return "event";
    case AlertKind::kSensor:
      return "sensor";
  }
  return "unknown";
}

const char* DetectorName(Detector detector) {
  switch (detector) {
    case Detector::kCusum:
      return "cusum";
    case Detector::kEwma:
      return "ewma";
    case Detector::kSpike:
      return "spike";
    case Detector::kNotFinite:
      return "not_finite";
    case Detector::kRange:
      return "range";
    case Detector::kFlatline:
      return "flatline";
    case Detector::kGap:
      return "gap";
    case Detector::kTemplate:
      return "template";
    case Detector::kLevel:
      return "level";
  }
  return "unknown";
}

const char* AlertPhaseName(AlertPhase phase) {
  return phase == AlertPhase::kRaise ? "raise" : "clear";
}

const char* PriorityName(Priority priority) {
  switch (priority) {
    case Priority::kLow:
      return "low";
    case Priority::kMedium:
      return "medium";
    case Priority::kHigh:
      return "high";
  }
  return "unknown";
}

}  // namespace nightjar::core
