#include "replay/report_html.h"

#include <algorithm>
#include <cinttypes>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <limits>
#include <string>
#include <string_view>
#include <vector>

#include "replay/timestamp.h"

namespace nightjar::replay {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr int kMinPoints = 16;
constexpr int kMaxPoints = 100'000;
// A pause in a channel's samples longer than this many median spacings breaks its lines.
constexpr double kGapFactor = 5.0;

// ---- text escaping ---------------------------------------------------------------

// Calls emit(code_point) for each code point of `text`; an invalid UTF-8 byte (stray
// continuation, overlong form, surrogate, beyond U+10FFFF, truncated sequence) is passed
// over alone and reported as U+FFFD.
template <typename Emit>
void ForEachCodePoint(std::string_view text, Emit emit) {
  std::size_t i = 0;
  while (i < text.size()) {
    const auto b0 = static_cast<unsigned char>(text[i]);
    if (b0 < 0x80) {
      emit(std::uint32_t{b0});
      ++i;
      continue;
    }
    int length = 0;
    std::uint32_t cp = 0;
    std::uint32_t min_cp = 0;
    if ((b0 & 0xE0) == 0xC0) {
      length = 2;
      cp = b0 & 0x1Fu;
      min_cp = 0x80;
    } else if ((b0 & 0xF0) == 0xE0) {
      length = 3;
      cp = b0 & 0x0Fu;
      min_cp = 0x800;
    } else if ((b0 & 0xF8) == 0xF0) {
      length = 4;
      cp = b0 & 0x07u;
      min_cp = 0x10000;
    }
    bool ok = length > 0 && i + static_cast<std::size_t>(length) <= text.size();
    for (int k = 1; ok && k < length; ++k) {
      const auto b = static_cast<unsigned char>(text[i + static_cast<std::size_t>(k)]);
      if ((b & 0xC0) != 0x80) {
        ok = false;
      } else {
        cp = (cp << 6) | (b & 0x3Fu);
      }
    }
    ok = ok && cp >= min_cp && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF);
    if (ok) {
      emit(cp);
      i += static_cast<std::size_t>(length);
    } else {
      emit(std::uint32_t{0xFFFD});
      ++i;
    }
  }
}

void AppendUtf8(std::string& out, std::uint32_t cp) {
  if (cp < 0x80) {
    out += static_cast<char>(cp);
  } else if (cp < 0x800) {
    out += static_cast<char>(0xC0 | (cp >> 6));
    out += static_cast<char>(0x80 | (cp & 0x3F));
  } else if (cp < 0x10000) {
    out += static_cast<char>(0xE0 | (cp >> 12));
    out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
    out += static_cast<char>(0x80 | (cp & 0x3F));
  } else {
    out += static_cast<char>(0xF0 | (cp >> 18));
    out += static_cast<char>(0x80 | ((cp >> 12) & 0x3F));
    out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
    out += static_cast<char>(0x80 | (cp & 0x3F));
  }
}

void AppendHex4(std::string& out, std::uint32_t unit) {
  char buffer[16];
  std::snprintf(buffer, sizeof buffer, "\\u%04x", static_cast<unsigned>(unit & 0xFFFF));
  out += buffer;
}

// ---- numbers and times -------------------------------------------------------------

// `x` with `digits` significant digits, or `null` when it is not finite.
void AppendJsonNumber(std::string& out, double x, int digits) {
  if (!std::isfinite(x)) {
    out += "null";
    return;
  }
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, x);
  out += buffer;
}

// Seconds since the page's origin, to the millisecond, without trailing zeros.
void AppendSeconds(std::string& out, double seconds) {
  if (!std::isfinite(seconds)) {
    out += "null";
    return;
  }
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.3f", seconds);
  std::string_view text(buffer);
  if (text.find('.') != std::string_view::npos) {
    while (text.back() == '0') text.remove_suffix(1);
    if (text.back() == '.') text.remove_suffix(1);
  }
  if (text == "-0") text = "0";
  out += text;
}

// For tables: fixed decimals, "—" for a number that is not there.
std::string Fixed(double x, int decimals) {
  if (!std::isfinite(x)) return "\xE2\x80\x94";
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, "%.*f", decimals, x);
  return buffer;
}

std::string Count(std::int64_t n) { return std::to_string(n); }

// "3 h 05 min 12 s" style duration.
std::string Duration(double seconds) {
  if (!std::isfinite(seconds) || seconds < 0) return "\xE2\x80\x94";
  const auto total = static_cast<std::int64_t>(std::llround(seconds));
  const std::int64_t days = total / 86400;
  const std::int64_t hours = total % 86400 / 3600;
  const std::int64_t minutes = total % 3600 / 60;
  const std::int64_t secs = total % 60;
  char buffer[64];
  if (days > 0) {
    std::snprintf(buffer, sizeof buffer, "%" PRId64 " d %02" PRId64 " h %02" PRId64 " min", days,
                  hours, minutes);
  } else if (hours > 0) {
    std::snprintf(buffer, sizeof buffer, "%" PRId64 " h %02" PRId64 " min %02" PRId64 " s", hours,
                  minutes, secs);
  } else if (minutes > 0) {
    std::snprintf(buffer, sizeof buffer, "%" PRId64 " min %02" PRId64 " s", minutes, secs);
  } else {
    std::snprintf(buffer, sizeof buffer, "%.3g s", seconds);
  }
  return buffer;
}

double At(const std::vector<double>& series, std::size_t i) {
  return i < series.size() ? series[i] : kNaN;
}

// ---- thinning ------------------------------------------------------------------------

// A channel's traces as the page draws them: rows of (x, value, expected, band low,
// band high, ratio). A row of NaN breaks every line.
struct Thinned {
  std::vector<double> x, v, e, lo, hi, r;
  void Push(double xi, double vi, double ei, double loi, double hii, double ri) {
    x.push_back(xi);
    v.push_back(vi);
    e.push_back(ei);
    lo.push_back(loi);
    hi.push_back(hii);
    r.push_back(ri);
  }
};

// Extremes of one series over one bucket, remembering which came first.
struct Extremes {
  double min = kNaN;
  double max = kNaN;
  std::size_t min_at = 0;
  std::size_t max_at = 0;
  void Add(double x, std::size_t at) {
    if (!std::isfinite(x)) return;
    if (std::isnan(min) || x < min) {
      min = x;
      min_at = at;
    }
    if (std::isnan(max) || x > max) {
      max = x;
      max_at = at;
    }
  }
  double First() const { return min_at <= max_at ? min : max; }
  double Second() const { return min_at <= max_at ? max : min; }
};

struct Bucket {
  std::size_t count = 0;
  core::TimestampUs first_time = 0;
  core::TimestampUs last_time = 0;
  Extremes v, e, lo, hi, r;
};

double MedianSpacing(const std::vector<core::TimestampUs>& times) {
  std::vector<core::TimestampUs> spacing;
  spacing.reserve(times.size());
  for (std::size_t i = 1; i < times.size(); ++i) {
    if (times[i] > times[i - 1]) spacing.push_back(times[i] - times[i - 1]);
  }
  if (spacing.empty()) return kNaN;
  auto middle = spacing.begin() + static_cast<std::ptrdiff_t>(spacing.size() / 2);
  std::nth_element(spacing.begin(), middle, spacing.end());
  return static_cast<double>(*middle);
}

// Keeps every sample when there are at most `max_points`; otherwise the first-occurring
// and the other extreme of each of max_points / 2 equal time buckets over [origin,
// origin + span_us], so no series holds more than max_points values.
Thinned Thin(const ReportChannel& channel, core::TimestampUs origin, core::TimestampUs span_us,
             int max_points) {
  const std::vector<core::TimestampUs>& times = channel.times;
  const std::size_t n = times.size();
  const auto buckets = static_cast<std::int64_t>(max_points / 2);
  const bool raw = n <= static_cast<std::size_t>(max_points) || span_us <= 0;
  const double median = MedianSpacing(times);
  const double gap_us =
      std::isnan(median) ? std::numeric_limits<double>::infinity() : kGapFactor * median;
  auto x_of = [&](core::TimestampUs t) { return core::ToSeconds(t - origin); };
  auto bucket_of = [&](std::size_t i) -> std::int64_t {
    if (raw) return static_cast<std::int64_t>(i);
    const double offset = static_cast<double>(times[i] - origin);
    const auto b = static_cast<std::int64_t>(
        std::floor(offset / static_cast<double>(span_us) * static_cast<double>(buckets)));
    return std::clamp<std::int64_t>(b, 0, buckets - 1);
  };

  Thinned out;
  Bucket bucket;
  std::int64_t bucket_id = -1;
  auto flush = [&]() {
    if (bucket.count == 0) return;
    if (bucket.count == 1) {
      out.Push(x_of(bucket.first_time), bucket.v.min, bucket.e.min, bucket.lo.min, bucket.hi.max,
               bucket.r.min);
    } else {
      out.Push(x_of(bucket.first_time), bucket.v.First(), bucket.e.First(), bucket.lo.min,
               bucket.hi.max, bucket.r.First());
      out.Push(x_of(bucket.last_time), bucket.v.Second(), bucket.e.Second(), bucket.lo.min,
               bucket.hi.max, bucket.r.Second());
    }
    bucket = Bucket{};
  };
  for (std::size_t i = 0; i < n; ++i) {
    const std::int64_t id = bucket_of(i);
    if (id != bucket_id) {
      flush();
      if (i > 0 && static_cast<double>(times[i] - times[i - 1]) > gap_us) {
        const double middle = 0.5 * (x_of(times[i - 1]) + x_of(times[i]));
        out.Push(middle, kNaN, kNaN, kNaN, kNaN, kNaN);
      }
      bucket_id = id;
    }
    if (bucket.count == 0) bucket.first_time = times[i];
    bucket.last_time = times[i];
    ++bucket.count;
    const double expected = At(channel.expected, i);
    const double band = At(channel.band, i);
    bucket.v.Add(At(channel.value, i), i);
    bucket.e.Add(expected, i);
    bucket.lo.Add(expected - band, i);
    bucket.hi.Add(expected + band, i);
    bucket.r.Add(At(channel.ratio, i), i);
  }
  flush();
  return out;
}

void AppendArray(std::string& out, const char* key, const std::vector<double>& values,
                 bool seconds) {
  out += '"';
  out += key;
  out += "\":[";
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (i > 0) out += ',';
    if (seconds) {
      AppendSeconds(out, values[i]);
    } else {
      AppendJsonNumber(out, values[i], 6);
    }
  }
  out += ']';
}

// ---- page pieces ---------------------------------------------------------------------

int WindowClass(const std::string& kind) {
  if (kind == kAnomalyWindowKind) return 0;
  if (kind == kEventWindowKind) return 1;
  return 2;
}

int AlertKindIndex(core::AlertKind kind) {
  switch (kind) {
    case core::AlertKind::kAnomaly:
      return 0;
    case core::AlertKind::kSensor:
      return 1;
    case core::AlertKind::kEvent:
      return 2;
  }
  return 0;
}

struct Span {
  core::TimestampUs origin = 0;
  core::TimestampUs end = 0;
  bool known = false;
};

Span TimeSpan(const ReportInput& input) {
  Span span;
  auto extend = [&](core::TimestampUs t) {
    if (!span.known) {
      span.origin = span.end = t;
      span.known = true;
    }
    span.origin = std::min(span.origin, t);
    span.end = std::max(span.end, t);
  };
  for (const ReportChannel& channel : input.channels) {
    if (!channel.times.empty()) {
      extend(channel.times.front());
      extend(channel.times.back());
    }
  }
  if (!span.known) {  // no samples: frame what else there is
    for (const core::Alert& alert : input.alerts) extend(alert.time);
    for (const LabelWindow& window : input.windows) {
      extend(window.start);
      extend(window.end);
    }
  }
  return span;
}

constexpr std::string_view kStyle = R"css(
:root{--fg:#1d2329;--muted:#5b6670;--line:#d5dbe0;--bg:#fff;--anomaly:rgba(214,64,52,.16);
--event:rgba(52,110,214,.14);--other:rgba(120,120,120,.16)}
*{box-sizing:border-box}
body{margin:0;padding:16px 20px 40px;font:14px/1.4 system-ui,-apple-system,"Segoe UI",sans-serif;
color:var(--fg);background:var(--bg)}
h1{font-size:20px;margin:0 0 4px}
h2{font-size:15px;margin:18px 0 4px;font-weight:600;word-break:break-all}
.nj-meta{display:grid;grid-template-columns:max-content 1fr;gap:2px 14px;margin:8px 0 12px}
.nj-meta dt{color:var(--muted)} .nj-meta dd{margin:0;word-break:break-all}
table{border-collapse:collapse;margin:6px 0 10px;font-variant-numeric:tabular-nums}
th,td{border-bottom:1px solid var(--line);padding:3px 9px;text-align:right;white-space:nowrap}
th:first-child,td:first-child{text-align:left}
td.nj-text{text-align:left;white-space:normal;word-break:break-all}
thead th{border-bottom:2px solid var(--muted)}
caption{text-align:left;color:var(--muted);caption-side:bottom;padding-top:4px}
details{margin:6px 0} summary{cursor:pointer;color:var(--muted)}
.nj-legend{display:flex;flex-wrap:wrap;gap:6px 16px;color:var(--muted);margin:10px 0}
.nj-sw{display:inline-block;width:22px;height:10px;margin-right:5px;vertical-align:middle}
.nj-chart canvas{display:block;width:100%;height:280px;border:1px solid var(--line)}
.nj-readout{color:var(--muted);min-height:1.4em;font-variant-numeric:tabular-nums}
.nj-count{color:var(--muted);font-weight:400}
)css";

// The drawing code. It reads the JSON block #nj-data and draws one chart per
// section.nj-chart, in order.
constexpr std::string_view kScript = R"js(
(function () {
  'use strict';
  var body = document.body;
  function fail(e) {
    body.dataset.ready = 'error';
    body.dataset.error = String((e && e.message) || e);
  }
  window.addEventListener('error', function (ev) { fail(ev.error || ev.message); });

  var C = {
    value: '#1f5fa8', expected: '#e08a00', band: 'rgba(224,138,0,.20)', ratio: '#6b3fa0',
    threshold: '#c62828', raise: '#c62828', clear: '#2e7d32', axis: '#5b6670',
    grid: '#eceff1', windows: ['rgba(214,64,52,.16)', 'rgba(52,110,214,.14)',
      'rgba(120,120,120,.16)']
  };
  var H = 280, ML = 70, MR = 14, TOP = 10, SIG_H = 160, GAP = 18, RAT_H = 62;
  var STEPS = [1, 2, 5, 10, 15, 30, 60, 120, 300, 600, 900, 1800, 3600, 7200, 10800,
    21600, 43200, 86400, 172800, 604800];

  function finite(x) { return typeof x === 'number' && isFinite(x); }
  function fmt(x) {
    if (!finite(x)) return '\u2014';
    var a = Math.abs(x);
    if (a !== 0 && (a >= 1e6 || a < 1e-3)) return x.toExponential(3);
    return x.toPrecision(a >= 1000 ? 6 : 4).replace(/\.?0+$/, '');
  }
  function clock(data, x, withSeconds) {
    var iso = new Date((data.origin + x) * 1000).toISOString();
    return withSeconds ? iso.slice(11, 19) : iso.slice(11, 16);
  }
  function range(arrays) {
    var lo = Infinity, hi = -Infinity;
    arrays.forEach(function (a) {
      for (var i = 0; i < a.length; i++) {
        if (finite(a[i])) { if (a[i] < lo) lo = a[i]; if (a[i] > hi) hi = a[i]; }
      }
    });
    if (!(lo <= hi)) return [0, 1];
    if (lo === hi) { var d = Math.abs(lo) * 0.01 || 1; return [lo - d, hi + d]; }
    var pad = (hi - lo) * 0.06;
    return [lo - pad, hi + pad];
  }
  function polyline(g, xs, ys, sx, sy) {
    var pen = false;
    g.beginPath();
    for (var i = 0; i < xs.length; i++) {
      if (!finite(ys[i]) || !finite(xs[i])) { pen = false; continue; }
      var px = sx(xs[i]), py = sy(ys[i]);
      if (pen) g.lineTo(px, py); else g.moveTo(px, py);
      pen = true;
    }
    g.stroke();
  }
  function bandFill(g, xs, lo, hi, sx, sy) {
    var i = 0;
    while (i < xs.length) {
      while (i < xs.length && !(finite(lo[i]) && finite(hi[i]))) i++;
      var s = i;
      while (i < xs.length && finite(lo[i]) && finite(hi[i])) i++;
      if (i - s < 1) continue;
      g.beginPath();
      g.moveTo(sx(xs[s]), sy(hi[s]));
      for (var k = s + 1; k < i; k++) g.lineTo(sx(xs[k]), sy(hi[k]));
      for (var k2 = i - 1; k2 >= s; k2--) g.lineTo(sx(xs[k2]), sy(lo[k2]));
      g.closePath();
      g.fill();
    }
  }

  function draw(chart, data) {
    var ch = chart.data, c = chart.canvas, g = c.getContext('2d');
    var dpr = window.devicePixelRatio || 1;
    var W = c.clientWidth || 800;
    c.width = Math.round(W * dpr);
    c.height = Math.round(H * dpr);
    g.setTransform(dpr, 0, 0, dpr, 0, 0);
    g.clearRect(0, 0, W, H);
    g.font = '11px system-ui, sans-serif';
    var span = data.span > 0 ? data.span : 1;
    var pw = Math.max(10, W - ML - MR);
    var sx = function (x) { return ML + x / span * pw; };
    var yr = range([ch.v, ch.e]);
    var sigTop = TOP, sigBot = TOP + SIG_H, ratTop = sigBot + GAP, ratBot = ratTop + RAT_H;
    var sy = function (y) { return sigBot - (y - yr[0]) / (yr[1] - yr[0]) * SIG_H; };
    var rmax = 1.5;
    for (var i = 0; i < ch.r.length; i++) if (finite(ch.r[i]) && ch.r[i] > rmax) rmax = ch.r[i];
    rmax = Math.min(5, rmax * 1.05);
    var ry = function (y) { return ratBot - Math.min(y, rmax) / rmax * RAT_H; };

    // Labelled windows behind everything, over both panels.
    data.windows.forEach(function (w) {
      var x0 = Math.max(ML, sx(w[0])), x1 = Math.min(ML + pw, Math.max(sx(w[1]), sx(w[0]) + 2));
      if (x1 <= x0) return;
      g.fillStyle = C.windows[w[2]];
      g.fillRect(x0, sigTop, x1 - x0, SIG_H);
      g.fillRect(x0, ratTop, x1 - x0, RAT_H);
    });

    // Time grid and axis.
    var step = STEPS[STEPS.length - 1];
    for (var s = 0; s < STEPS.length; s++) { if (span / STEPS[s] <= 10) { step = STEPS[s]; break; } }
    var first = Math.ceil((data.origin) / step) * step - data.origin;
    g.strokeStyle = C.grid; g.fillStyle = C.axis; g.lineWidth = 1; g.textAlign = 'center';
    for (var tx = first; tx <= span + 1e-9; tx += step) {
      var px = Math.round(sx(tx)) + 0.5;
      g.beginPath(); g.moveTo(px, sigTop); g.lineTo(px, ratBot); g.stroke();
      g.fillText(clock(data, tx, step < 60), px, H - 6);
    }
    g.strokeStyle = C.axis;
    g.strokeRect(ML + 0.5, sigTop + 0.5, pw, SIG_H);
    g.strokeRect(ML + 0.5, ratTop + 0.5, pw, RAT_H);
    g.textAlign = 'right';
    [yr[0], (yr[0] + yr[1]) / 2, yr[1]].forEach(function (y) {
      g.fillText(fmt(y), ML - 5, Math.min(sigBot, Math.max(sigTop + 9, sy(y) + 4)));
    });
    [0, 1, rmax].forEach(function (y) { g.fillText(fmt(y), ML - 5, Math.max(ratTop + 9, ry(y) + 4)); });

    // Signal panel: band, expected, value.
    g.save();
    g.beginPath(); g.rect(ML, sigTop, pw, SIG_H); g.clip();
    g.fillStyle = C.band; bandFill(g, ch.x, ch.lo, ch.hi, sx, sy);
    g.lineWidth = 1.2;
    g.setLineDash([5, 3]); g.strokeStyle = C.expected; polyline(g, ch.x, ch.e, sx, sy);
    g.setLineDash([]); g.strokeStyle = C.value; polyline(g, ch.x, ch.v, sx, sy);
    g.restore();

    // Ratio panel with the threshold at 1.
    g.save();
    g.beginPath(); g.rect(ML, ratTop, pw, RAT_H); g.clip();
    g.strokeStyle = C.ratio; g.lineWidth = 1;
    polyline(g, ch.x, ch.r.map(function (r) { return finite(r) ? Math.min(r, rmax) : r; }),
      sx, ry);
    g.strokeStyle = C.threshold; g.setLineDash([4, 3]);
    g.beginPath(); g.moveTo(ML, Math.round(ry(1)) + 0.5); g.lineTo(ML + pw, Math.round(ry(1)) + 0.5);
    g.stroke(); g.setLineDash([]);
    g.restore();

    // Alert markers: raise solid with a triangle on top, clear dashed.
    ch.alerts.forEach(function (a) {
      if (!(a[0] >= 0 && a[0] <= span)) return;
      var px = Math.round(sx(a[0])) + 0.5, raise = a[1] === 1;
      g.strokeStyle = raise ? C.raise : C.clear;
      g.setLineDash(raise ? [] : [3, 3]);
      g.beginPath(); g.moveTo(px, sigTop); g.lineTo(px, ratBot); g.stroke();
      g.setLineDash([]);
      if (raise) {
        g.fillStyle = C.raise;
        g.beginPath(); g.moveTo(px - 4, sigTop); g.lineTo(px + 4, sigTop); g.lineTo(px, sigTop + 6);
        g.closePath(); g.fill();
      }
    });
    g.fillStyle = C.axis; g.textAlign = 'left';
    g.fillText('ratio', 4, ratTop + 10);
    chart.sx = sx; chart.pw = pw;
  }

  function nearest(xs, x) {
    var lo = 0, hi = xs.length - 1;
    if (hi < 0) return -1;
    while (hi - lo > 1) { var m = (lo + hi) >> 1; if (xs[m] < x) lo = m; else hi = m; }
    return Math.abs(xs[lo] - x) <= Math.abs(xs[hi] - x) ? lo : hi;
  }

  function attachReadout(chart, data) {
    chart.canvas.addEventListener('mousemove', function (ev) {
      var rect = chart.canvas.getBoundingClientRect();
      var x = (ev.clientX - rect.left - ML) / chart.pw * (data.span > 0 ? data.span : 1);
      var ch = chart.data, i = nearest(ch.x, x);
      if (i < 0) return;
      var band = finite(ch.hi[i]) && finite(ch.lo[i]) ? (ch.hi[i] - ch.lo[i]) / 2 : NaN;
      chart.readout.textContent = clock(data, ch.x[i], true) + ' UTC   value ' + fmt(ch.v[i]) +
        '   expected ' + fmt(ch.e[i]) + ' \u00b1 ' + fmt(band) + '   ratio ' + fmt(ch.r[i]);
    });
  }

  try {
    var data = JSON.parse(document.getElementById('nj-data').textContent);
    var sections = document.querySelectorAll('section.nj-chart');
    if (sections.length !== data.channels.length) {
      throw new Error(sections.length + ' chart sections for ' + data.channels.length + ' channels');
    }
    var charts = [];
    for (var i = 0; i < data.channels.length; i++) {
      charts.push({ data: data.channels[i], canvas: sections[i].querySelector('canvas'),
        readout: sections[i].querySelector('.nj-readout') });
    }
    var drawn = 0;
    charts.forEach(function (chart) { draw(chart, data); attachReadout(chart, data); drawn++; });
    var pending = 0;
    window.addEventListener('resize', function () {
      clearTimeout(pending);
      pending = setTimeout(function () { charts.forEach(function (c) { draw(c, data); }); }, 150);
    });
    body.dataset.charts = String(drawn);
    body.dataset.ready = 'ok';
  } catch (e) {
    fail(e);
    throw e;
  }
})();
)js";

void AppendMeta(std::string& out, std::string_view term, const std::string& html_value) {
  out += "<dt>";
  out += term;
  out += "</dt><dd>";
  out += html_value;
  out += "</dd>\n";
}

std::string KindCounts(const std::vector<core::Alert>& alerts) {
  std::int64_t raises[3] = {0, 0, 0};
  std::int64_t clears = 0;
  for (const core::Alert& alert : alerts) {
    if (alert.phase == core::AlertPhase::kRaise) {
      ++raises[AlertKindIndex(alert.kind)];
    } else {
      ++clears;
    }
  }
  return Count(raises[0] + raises[1] + raises[2]) + " raised (" + Count(raises[0]) + " anomaly, " +
         Count(raises[1]) + " sensor, " + Count(raises[2]) + " event), " + Count(clears) +
         " cleared";
}

void AppendScoreTable(std::string& out, const ReportInput& input) {
  bool any_points = false;
  for (const ReportScoreRow& row : input.scores) any_points = any_points || row.points.has_value();
  out +=
      "<h2>Scores</h2>\n<table class=\"nj-scores\"><thead><tr><th>detector</th>"
      "<th>windows found</th><th>recall</th><th>raises</th><th>true</th><th>expected</th>"
      "<th>false</th><th>false / day</th><th>precision</th><th>F1</th>"
      "<th>mean delay</th>";
  if (any_points) out += "<th>point precision</th><th>point recall</th><th>point F1</th>";
  out += "</tr></thead><tbody>\n";
  for (const ReportScoreRow& row : input.scores) {
    const EventScores& s = row.events.overall;
    out += "<tr><td>" + EscapeHtml(row.detector) + "</td><td>" + Count(s.detected) + " / " +
           Count(s.windows) + "</td><td>" + Fixed(s.recall, 3) + "</td><td>" + Count(s.raises) +
           "</td><td>" + Count(s.true_raises) + "</td><td>" + Count(s.expected_raises) +
           "</td><td>" + Count(s.false_alarms) + "</td><td>" + Fixed(s.false_alarms_per_day, 1) +
           "</td><td>" + Fixed(s.precision, 3) + "</td><td>" + Fixed(s.f1, 3) + "</td><td>" +
           (std::isfinite(s.mean_delay_s) ? Duration(s.mean_delay_s) : Fixed(kNaN, 0)) + "</td>";
    if (any_points) {
      const std::optional<PointScores>& p = row.points;
      out += "<td>" + (p ? Fixed(p->precision(), 3) : Fixed(kNaN, 0)) + "</td><td>" +
             (p ? Fixed(p->recall(), 3) : Fixed(kNaN, 0)) + "</td><td>" +
             (p ? Fixed(p->f1(), 3) : Fixed(kNaN, 0)) + "</td>";
    }
    out += "</tr>\n";
  }
  out +=
      "</tbody><caption>Event-wise: a window counts as found when a raise falls in "
      "[start, end + " +
      Fixed(input.scoring.grace_s, 0) +
      " s]; raises during expected events are neither true nor false; all channels "
      "pooled; anomaly alarms only (sensor alarms are data quality). Point-wise: each "
      "instant, flagged while any anomaly alarm is active, positive inside an anomaly "
      "window (see FORMAT.md, Scoring).</caption></table>\n";
  for (const ReportScoreRow& row : input.scores) {
    out += "<details><summary>" + EscapeHtml(row.detector) +
           ": per channel and per window</summary>\n<table><thead><tr><th>channel</th>"
           "<th>windows found</th><th>raises</th><th>true</th><th>false</th><th>precision</th>"
           "<th>recall</th><th>F1</th></tr></thead><tbody>\n";
    for (const ChannelEventScores& channel : row.events.channels) {
      const EventScores& s = channel.scores;
      out += "<tr><td class=\"nj-text\">" + EscapeHtml(channel.channel) + "</td><td>" +
             Count(s.detected) + " / " + Count(s.windows) + "</td><td>" + Count(s.raises) +
             "</td><td>" + Count(s.true_raises) + "</td><td>" + Count(s.false_alarms) +
             "</td><td>" + Fixed(s.precision, 3) + "</td><td>" + Fixed(s.recall, 3) + "</td><td>" +
             Fixed(s.f1, 3) + "</td></tr>\n";
    }
    out +=
        "</tbody></table>\n<table><thead><tr><th>anomaly window (UTC)</th><th>found</th>"
        "<th>delay</th><th>first raised on</th></tr></thead><tbody>\n";
    for (const WindowOutcome& outcome : row.events.overall.outcomes) {
      out += "<tr><td>" + EscapeHtml(FormatTimestamp(outcome.start)) + " \xE2\x80\x93 " +
             EscapeHtml(FormatTimestamp(outcome.end)) + "</td><td>" +
             (outcome.detected ? "yes" : "no") + "</td><td>" +
             (outcome.detected ? Duration(outcome.delay_s) : Fixed(kNaN, 0)) +
             "</td><td class=\"nj-text\">" + EscapeHtml(outcome.first_channel) + "</td></tr>\n";
    }
    out += "</tbody></table></details>\n";
  }
}

void AppendAlertTable(std::string& out, const ReportInput& input) {
  const std::size_t limit = static_cast<std::size_t>(std::max(0, input.max_listed_alerts));
  out += "<details class=\"nj-alerts\"><summary>Alert list (" +
         Count(static_cast<std::int64_t>(input.alerts.size())) +
         ")</summary>\n<table><thead><tr><th>time (UTC)</th><th>channel</th><th>phase</th>"
         "<th>kind</th><th>detector</th><th>value</th><th>expected</th><th>message</th>"
         "</tr></thead><tbody>\n";
  for (std::size_t i = 0; i < input.alerts.size() && i < limit; ++i) {
    const core::Alert& a = input.alerts[i];
    out += "<tr><td>" + EscapeHtml(FormatTimestamp(a.time)) + "</td><td class=\"nj-text\">" +
           EscapeHtml(a.channel) + "</td><td>" + core::AlertPhaseName(a.phase) + "</td><td>" +
           core::AlertKindName(a.kind) + "</td><td>" + core::DetectorName(a.detector) +
           "</td><td>" + EscapeHtml(Fixed(a.value, 4)) + "</td><td>" +
           EscapeHtml(Fixed(a.expected, 4)) + "</td><td class=\"nj-text\">" +
           EscapeHtml(a.message) + "</td></tr>\n";
  }
  out += "</tbody></table>\n";
  if (input.alerts.size() > limit) {
    out += "<p>" + Count(static_cast<std::int64_t>(input.alerts.size() - limit)) +
           " more not listed.</p>\n";
  }
  out += "</details>\n";
}

}  // namespace

std::string EscapeHtml(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  ForEachCodePoint(text, [&](std::uint32_t cp) {
    switch (cp) {
      case '&':
        out += "&amp;";
        return;
      case '<':
        out += "&lt;";
        return;
      case '>':
        out += "&gt;";
        return;
      case '"':
        out += "&quot;";
        return;
      case '\'':
        out += "&#39;";
        return;
      default:
        break;
    }
    // C0 controls other than tab/newline and DEL are not allowed in HTML text.
    if ((cp < 0x20 && cp != '\t' && cp != '\n') || cp == 0x7F) cp = 0xFFFD;
    AppendUtf8(out, cp);
  });
  return out;
}

std::string JsonString(std::string_view text) {
  std::string out;
  out.reserve(text.size() + 2);
  out += '"';
  ForEachCodePoint(text, [&](std::uint32_t cp) {
    switch (cp) {
      case '"':
        out += "\\\"";
        return;
      case '\\':
        out += "\\\\";
        return;
      case '\n':
        out += "\\n";
        return;
      case '\r':
        out += "\\r";
        return;
      case '\t':
        out += "\\t";
        return;
      default:
        break;
    }
    if (cp < 0x20 || cp == '<' || cp == '>' || cp == '&' || cp == 0x2028 || cp == 0x2029) {
      AppendHex4(out, cp);
    } else {
      AppendUtf8(out, cp);
    }
  });
  out += '"';
  return out;
}

std::string RenderReport(const ReportInput& input) {
  const int max_points = std::clamp(input.max_points, kMinPoints, kMaxPoints);
  const Span span = TimeSpan(input);
  const core::TimestampUs span_us = span.end - span.origin;

  // Raises per channel, for the chart headings.
  std::vector<std::int64_t> raises(input.channels.size(), 0);

  std::string data;
  data.reserve(64 * 1024);
  data += "{\"origin\":";
  AppendJsonNumber(data, core::ToSeconds(span.origin), 16);
  data += ",\"span\":";
  AppendSeconds(data, core::ToSeconds(span_us));
  data += ",\"windows\":[";
  for (std::size_t i = 0; i < input.windows.size(); ++i) {
    const LabelWindow& window = input.windows[i];
    if (i > 0) data += ',';
    data += '[';
    AppendSeconds(data, core::ToSeconds(window.start - span.origin));
    data += ',';
    AppendSeconds(data, core::ToSeconds(window.end - span.origin));
    data += ',' + std::to_string(WindowClass(window.kind)) + ',' + JsonString(window.kind) + ']';
  }
  data += "],\"channels\":[";
  for (std::size_t c = 0; c < input.channels.size(); ++c) {
    const ReportChannel& channel = input.channels[c];
    const Thinned thinned = Thin(channel, span.origin, span_us, max_points);
    if (c > 0) data += ',';
    data +=
        "\n{\"name\":" + JsonString(channel.name) + ",\"unit\":" + JsonString(channel.unit) + ',';
    AppendArray(data, "x", thinned.x, true);
    data += ',';
    AppendArray(data, "v", thinned.v, false);
    data += ',';
    AppendArray(data, "e", thinned.e, false);
    data += ',';
    AppendArray(data, "lo", thinned.lo, false);
    data += ',';
    AppendArray(data, "hi", thinned.hi, false);
    data += ',';
    AppendArray(data, "r", thinned.r, false);
    data += ",\"alerts\":[";
    bool first = true;
    for (const core::Alert& alert : input.alerts) {
      if (alert.channel != channel.name) continue;
      if (!first) data += ',';
      first = false;
      data += '[';
      AppendSeconds(data, core::ToSeconds(alert.time - span.origin));
      const bool raise = alert.phase == core::AlertPhase::kRaise;
      raises[c] += raise ? 1 : 0;
      data += raise ? ",1," : ",0,";
      data += std::to_string(AlertKindIndex(alert.kind)) + ']';
    }
    data += "]}";
  }
  data += "]}";

  std::int64_t window_counts[3] = {0, 0, 0};
  for (const LabelWindow& window : input.windows) ++window_counts[WindowClass(window.kind)];

  std::string page;
  page.reserve(data.size() + 32 * 1024);
  page +=
      "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
      "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
      "style-src 'unsafe-inline'; script-src 'unsafe-inline'\">\n<title>";
  page += EscapeHtml(input.title);
  if (!input.file_name.empty()) page += " \xE2\x80\x94 " + EscapeHtml(input.file_name);
  page += "</title>\n<style>";
  page += kStyle;
  page += "</style>\n</head>\n<body>\n<header>\n<h1>" + EscapeHtml(input.title) +
          "</h1>\n<dl class=\"nj-meta\">\n";
  AppendMeta(page, "file", input.file_name.empty() ? Fixed(kNaN, 0) : EscapeHtml(input.file_name));
  if (span.known) {
    AppendMeta(page, "time span",
               EscapeHtml(FormatTimestamp(span.origin)) + " \xE2\x80\x93 " +
                   EscapeHtml(FormatTimestamp(span.end)) + " (" +
                   Duration(core::ToSeconds(span_us)) + ")");
  } else {
    AppendMeta(page, "time span", Fixed(kNaN, 0));
  }
  std::int64_t samples = 0;
  for (const ReportChannel& channel : input.channels) {
    samples += static_cast<std::int64_t>(channel.times.size());
  }
  AppendMeta(page, "channels",
             Count(static_cast<std::int64_t>(input.channels.size())) + " (" + Count(samples) +
                 " samples)");
  AppendMeta(page, "alerts", KindCounts(input.alerts));
  AppendMeta(page, "labelled windows",
             Count(window_counts[0]) + " anomaly, " + Count(window_counts[1]) + " event" +
                 (window_counts[2] > 0 ? ", " + Count(window_counts[2]) + " other" : ""));
  page += "</dl>\n</header>\n";
  if (!input.scores.empty()) AppendScoreTable(page, input);
  page +=
      "<div class=\"nj-legend\">"
      "<span><span class=\"nj-sw\" style=\"background:#1f5fa8;height:2px\"></span>value</span>"
      "<span><span class=\"nj-sw\" style=\"border-top:2px dashed #e08a00;height:0\"></span>"
      "expected</span>"
      "<span><span class=\"nj-sw\" style=\"background:rgba(224,138,0,.25)\"></span>band "
      "(expected \xC2\xB1 3 residual \xCF\x83)</span>"
      "<span><span class=\"nj-sw\" style=\"background:#6b3fa0;height:2px\"></span>statistic / "
      "threshold (threshold = 1)</span>"
      "<span><span class=\"nj-sw\" style=\"background:#c62828;width:3px\"></span>raise</span>"
      "<span><span class=\"nj-sw\" style=\"border-left:2px dashed #2e7d32;width:3px\"></span>"
      "clear</span>"
      "<span><span class=\"nj-sw\" style=\"background:var(--anomaly)\"></span>anomaly "
      "window</span>"
      "<span><span class=\"nj-sw\" style=\"background:var(--event)\"></span>expected event</span>"
      "<span><span class=\"nj-sw\" style=\"background:var(--other)\"></span>other label</span>"
      "</div>\n";
  for (std::size_t c = 0; c < input.channels.size(); ++c) {
    const ReportChannel& channel = input.channels[c];
    page += "<section class=\"nj-chart\">\n<h2>" + EscapeHtml(channel.name);
    if (!channel.unit.empty()) page += " [" + EscapeHtml(channel.unit) + "]";
    page += " <span class=\"nj-count\">" + Count(raises[c]) + " raised</span></h2>\n";
    page += "<canvas role=\"img\" aria-label=\"" + EscapeHtml(channel.name) +
            "\"></canvas>\n<div class=\"nj-readout\"></div>\n</section>\n";
  }
  AppendAlertTable(page, input);
  page += "<script type=\"application/json\" id=\"nj-data\">";
  page += data;
  page += "</script>\n<script>";
  page += kScript;
  page += "</script>\n</body>\n</html>\n";
  return page;
}

}  // namespace nightjar::replay
