// Dynamic time warping and its lower bound, for matching expected-event templates.
//
// Conventions (they differ between implementations, so they are fixed here):
// recursion D(i,j) = c(i,j) + min(D(i-1,j-1), D(i-1,j), D(i,j-1)) with D(0,0) = c(0,0)
// (Sakoe & Chiba 1978, symmetric form without slope weights); the Sakoe-Chiba band keeps
// cells with |i - j| <= band (band < 0: unconstrained); the squared-cost form reports
// sqrt(D(n-1, m-1)), as LB_Keogh (Keogh 2002) does; z-normalisation uses the population
// standard deviation. Pure functions; the streaming ones take caller-owned buffers so
// they never allocate. Thread-safety: stateless.
#pragma once

#include <span>
#include <vector>

namespace nightjar::core {

enum class DtwCost { kAbsolute, kSquared };

// Full accumulated-cost matrix, row-major n x m (for inspection and tests; allocates).
// Cells outside the band hold +infinity.
std::vector<double> DtwAccumulated(std::span<const double> a, std::span<const double> b,
                                   DtwCost cost, int band);

// DTW distance: D(n-1, m-1) for kAbsolute, sqrt of it for kSquared. `rows` must hold
// 2 * (b.size()) doubles of scratch. Returns +infinity if the band cannot connect the
// corners (|n - m| > band). Stops early and returns +infinity once every cell of a row
// exceeds `abandon_above` (squared units for kSquared); pass +infinity to disable.
double DtwDistance(std::span<const double> a, std::span<const double> b, DtwCost cost, int band,
                   std::span<double> rows, double abandon_above);

// Envelope of q over +-band samples: upper[i] = max q[i-band..i+band], lower likewise.
void KeoghEnvelope(std::span<const double> q, int band, std::span<double> upper,
                   std::span<double> lower);

// LB_Keogh(c; envelope) = sqrt(sum over c outside [lower, upper] of its squared distance
// to the nearer bound). A lower bound of the banded squared-cost DTW distance.
double LbKeogh(std::span<const double> c, std::span<const double> upper,
               std::span<const double> lower);

// Writes (x - mean) / population_sd into out; returns false (out untouched) when the
// spread is below min_sd, where a z-normalised shape is undefined (common practice).
bool ZNormalize(std::span<const double> x, std::span<double> out, double min_sd);

}  // namespace nightjar::core
