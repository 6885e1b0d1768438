#include "core/alert_message.h"

#include <cmath>
#include <cstdio>

namespace nightjar::core {

std::string FormatValue(double value) {
  if (!std::isfinite(value)) return std::isnan(value) ? "NaN" : (value > 0 ? "+Inf" : "-Inf");
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.3g", value);
  return buffer;
}

std::string FormatDuration(double seconds) {
  char buffer[32];
  if (seconds < 120.0) {
    std::snprintf(buffer, sizeof buffer, "%.0f s", seconds);
  } else if (seconds < 7200.0) {
    std::snprintf(buffer, sizeof buffer, "%.1f min", seconds / 60.0);
  } else {
    std::snprintf(buffer, sizeof buffer, "%.1f h", seconds / 3600.0);
  }
  return buffer;
}

std::string FormatWithUnit(double value, std::string_view unit) {
  std::string text = FormatValue(value);
  if (!unit.empty()) {
    text += ' ';
    text += unit;
  }
  return text;
}

std::string AnomalyRaiseMessage(std::string_view channel, std::string_view unit, double value,
                                double expected, double z, double duration_s, bool spike) {
  char sigmas[32];
  std::snprintf(sigmas, sizeof sigmas, "%.1f", std::abs(z));
  std::string message(channel);
  message += ' ';
  message += FormatWithUnit(value, unit);
  message += spike ? " spiked " : " is ";
  message += sigmas;
  message += "σ ";
  message += z >= 0.0 ? "above" : "below";
  message += " the expected ";
  message += FormatValue(expected);
  if (!spike) {
    message += " for ";
    message += FormatDuration(duration_s);
  }
  return message;
}

std::string AnomalyClearMessage(std::string_view channel, std::string_view unit, double value,
                                double expected, double lasted_s) {
  std::string message(channel);
  message += " back to normal at ";
  message += FormatWithUnit(value, unit);
  message += " (expected ";
  message += FormatValue(expected);
  message += ") after ";
  message += FormatDuration(lasted_s);
  return message;
}

}  // namespace nightjar::core
