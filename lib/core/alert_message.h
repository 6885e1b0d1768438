// One-line human messages for alerts, e.g.
//   "skid1.flow 12.4 m3/h is 5.1σ above the expected 9.8 for 40 s".
// Pure string formatting; allocates, so it is called only when an alert is emitted.
// Thread-safety: stateless functions.
#pragma once

#include <string>
#include <string_view>

namespace nightjar::core {

// Significant-digit formatting that reads well for plant values: 12.4, 0.0031, 1.25e+06.
std::string FormatValue(double value);
// "40 s", "3.5 min", "2.1 h".
std::string FormatDuration(double seconds);
// "12.4 m3/h" or "12.4" when unit is empty.
std::string FormatWithUnit(double value, std::string_view unit);

std::string AnomalyRaiseMessage(std::string_view channel, std::string_view unit, double value,
                                double expected, double z, double duration_s, bool spike);
std::string AnomalyClearMessage(std::string_view channel, std::string_view unit, double value,
                                double expected, double lasted_s);

}  // namespace nightjar::core
