// Replay report: one self-contained HTML page showing what a replayed recording did.
//
// The page needs nothing from outside: inline CSS, inline vanilla JavaScript drawing on
// one <canvas> per channel, and the data as one inline JSON block; no network, fonts or
// scripts are fetched, so it can be mailed or opened from a USB stick. Per channel it
// draws, on a shared UTC time axis:
//  * top panel: the measured value, the expected value and its band (expected +- band,
//    the caller's 3 residual sigmas);
//  * bottom panel: the detector's statistic / threshold ratio with the threshold line
//    at 1.0 (values above the panel's top are drawn at its edge);
//  * raise and clear markers of the channel's alerts, and the labelled windows shaded
//    across both panels (anomaly, event and other kinds in three different shades).
// A header gives the file name, time span, alert counts and, when given, a score table
// with one row per detector (and per-channel and per-window detail below it).
//
// Long series are thinned for the page: each series keeps the minimum and maximum of
// every time bucket (at most max_points values per series and channel), so a day of
// 1 s data stays well under a few MB while spikes stay visible. A gap in a channel's
// samples longer than 5 times its median sample spacing breaks the lines.
//
// All caller text (channel names, units, messages, file name, detector names) is
// escaped for its place (HTML text, or JSON inside the page's script block); bytes
// that are not valid UTF-8 become U+FFFD. Non-finite numbers are drawn as gaps.
//
// When the page has drawn every chart its script sets data-ready="ok" and
// data-charts="<number drawn>" on <body>; a script error sets data-ready="error" and
// data-error (the browser test relies on this).
//
// Thread-safety: pure function over plain values, safe from any thread.
// Ownership: the input is borrowed for the call; the page is returned by value.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "core/alert.h"
#include "core/time.h"
#include "replay/event_scoring.h"
#include "replay/labels.h"

namespace nightjar::replay {

// The traces of one channel. `times` must be sorted. Each other vector is either empty
// (not drawn) or as long as `times`; a shorter one is padded with NaN (drawn as a gap).
struct ReportChannel {
  std::string name;
  std::string unit;                      // shown beside the name; may be empty
  std::vector<core::TimestampUs> times;  // sample times
  std::vector<double> value;             // measured value
  std::vector<double> expected;          // forecast; NaN while there is none (learning)
  std::vector<double> band;              // half-width around expected (3 residual sigma)
  std::vector<double> ratio;             // statistic / threshold; >= 1 signals
};

// One detector's scores, one row of the table.
struct ReportScoreRow {
  std::string detector;               // e.g. "nightjar", "next = last", "static ±3σ"
  EventScoreTable events;             // per channel and overall
  std::optional<PointScores> points;  // pooled point-wise counts, if computed
};

struct ReportInput {
  std::string title = "nightjar replay report";
  std::string file_name;  // the recording, as the user named it
  std::vector<ReportChannel> channels;
  // Alerts of the replayed detector. Markers go on the chart of their channel; alerts of
  // channels without a chart are counted in the header only.
  std::vector<core::Alert> alerts;
  std::vector<LabelWindow> windows;
  std::vector<ReportScoreRow> scores;  // empty: no score table
  // The scoring rule's grace, shown with the score table.
  ScoringOptions scoring;
  // Most values kept per series and channel after thinning. Clamped to [16, 100000].
  int max_points = 2000;
  // Most alerts listed in the page's alert table (markers are always all drawn).
  int max_listed_alerts = 2000;
};

// The whole page, UTF-8. Never fails: bad or missing numbers are drawn as gaps.
std::string RenderReport(const ReportInput& input);

// Escaping used by the page, exposed for tests. HTML: & < > " ' as entities. JSON: a
// quoted JSON string with <, >, &, U+2028 and U+2029 as \u escapes, so the text can
// never end the surrounding <script> element. Both map invalid UTF-8 bytes to U+FFFD.
std::string EscapeHtml(std::string_view text);
std::string JsonString(std::string_view text);

}  // namespace nightjar::replay
