#include "core/dtw.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <limits>

namespace nightjar::core {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

double LocalCost(double x, double y, DtwCost cost) {
  const double d = x - y;
  return cost == DtwCost::kAbsolute ? std::abs(d) : d * d;
}

bool InBand(std::size_t i, std::size_t j, int band) {
  if (band < 0) return true;
  const std::size_t gap = i > j ? i - j : j - i;
  return gap <= static_cast<std::size_t>(band);
}

}  // namespace

std::vector<double> DtwAccumulated(std::span<const double> a, std::span<const double> b,
                                   DtwCost cost, int band) {
  const std::size_t n = a.size();
  const std::size_t m = b.size();
  std::vector<double> d(n * m, kInf);
  for (std::size_t i = 0; i < n; ++i) {
    for (std::size_t j = 0; j < m; ++j) {
      if (!InBand(i, j, band)) continue;
      double best = 0.0;
      if (i > 0 || j > 0) {
        best = kInf;
        if (i > 0 && j > 0) best = std::min(best, d[(i - 1) * m + j - 1]);
        if (i > 0) best = std::min(best, d[(i - 1) * m + j]);
        if (j > 0) best = std::min(best, d[i * m + j - 1]);
      }
      d[i * m + j] = LocalCost(a[i], b[j], cost) + best;
    }
  }
  return d;
}

double DtwDistance(std::span<const double> a, std::span<const double> b, DtwCost cost, int band,
                   std::span<double> rows, double abandon_above) {
  const std::size_t n = a.size();
  const std::size_t m = b.size();
  if (n == 0 || m == 0) return kInf;
  assert(rows.size() >= 2 * m);
  if (band >= 0 && (n > m ? n - m : m - n) > static_cast<std::size_t>(band)) return kInf;
  std::span<double> previous = rows.subspan(0, m);
  std::span<double> current = rows.subspan(m, m);
  for (std::size_t i = 0; i < n; ++i) {
    double row_min = kInf;
    for (std::size_t j = 0; j < m; ++j) {
      double value = kInf;
      if (InBand(i, j, band)) {
        double best = 0.0;
        if (i > 0 || j > 0) {
          best = kInf;
          if (i > 0 && j > 0) best = std::min(best, previous[j - 1]);
          if (i > 0) best = std::min(best, previous[j]);
          if (j > 0) best = std::min(best, current[j - 1]);
        }
        value = LocalCost(a[i], b[j], cost) + best;
      }
      current[j] = value;
      row_min = std::min(row_min, value);
    }
    // Every path crosses every row, so no path can end below this row's minimum.
    if (row_min > abandon_above) return kInf;
    std::swap(previous, current);
  }
  const double total = previous[m - 1];
  return cost == DtwCost::kSquared ? std::sqrt(total) : total;
}

void KeoghEnvelope(std::span<const double> q, int band, std::span<double> upper,
                   std::span<double> lower) {
  const std::size_t n = q.size();
  const std::size_t r = band < 0 ? n : static_cast<std::size_t>(band);
  for (std::size_t i = 0; i < n; ++i) {
    const std::size_t from = i > r ? i - r : 0;
    const std::size_t to = std::min(n - 1, i + r);
    const auto [lo, hi] = std::minmax_element(q.begin() + static_cast<std::ptrdiff_t>(from),
                                              q.begin() + static_cast<std::ptrdiff_t>(to) + 1);
    upper[i] = *hi;
    lower[i] = *lo;
  }
}

double LbKeogh(std::span<const double> c, std::span<const double> upper,
               std::span<const double> lower) {
  double sum = 0.0;
  for (std::size_t i = 0; i < c.size(); ++i) {
    if (c[i] > upper[i]) {
      sum += (c[i] - upper[i]) * (c[i] - upper[i]);
    } else if (c[i] < lower[i]) {
      sum += (c[i] - lower[i]) * (c[i] - lower[i]);
    }
  }
  return std::sqrt(sum);
}

bool ZNormalize(std::span<const double> x, std::span<double> out, double min_sd) {
  if (x.empty()) return false;
  double mean = 0.0;
  for (const double v : x) mean += v;
  mean /= static_cast<double>(x.size());
  double ss = 0.0;
  for (const double v : x) ss += (v - mean) * (v - mean);
  const double sd = std::sqrt(ss / static_cast<double>(x.size()));
  if (!(sd >= min_sd) || sd == 0.0) return false;
  for (std::size_t i = 0; i < x.size(); ++i) out[i] = (x[i] - mean) / sd;
  return true;
}

}  // namespace nightjar::core
