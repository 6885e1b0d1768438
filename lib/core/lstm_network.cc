#include "core/lstm_network.h"

#include <cassert>
#include <cmath>

namespace nightjar::core {
namespace {

using Eigen::Index;

// splitmix64 (Steele, Lea & Flood 2014; constants as in Vigna's public-domain
// reference code, from memory): tiny, fast, and fully specified, unlike the
// distributions of <random>, whose output differs between standard libraries.
std::uint64_t SplitMix64(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

// Uniform on [0, 1) from the top 53 bits.
double UniformUnit(std::uint64_t& state) {
  return static_cast<double>(SplitMix64(state) >> 11) * 0x1.0p-53;
}

template <typename Scalar>
Scalar ClipGradientNormImpl(Eigen::Ref<Eigen::Matrix<Scalar, Eigen::Dynamic, 1>>& gradient,
                            Scalar max_norm) {
  const Scalar norm = gradient.norm();
  if (std::isfinite(norm) && max_norm > Scalar(0) && norm > max_norm) {
    gradient *= max_norm / norm;
  }
  return norm;
}

// Packet kernels for the hot loops, used when H is a multiple of the packet size (so
// every gate block is whole packets) and the packet has a vectorised tanh (float).
// They fuse what Eigen would do in several passes (product, bias, activation, cell
// update) and keep the accumulators in registers. Other sizes take the plain Eigen
// path in LstmNetwork, which computes the same quantities.
template <typename Scalar>
struct Kernels {
  using Packet = typename Eigen::internal::packet_traits<Scalar>::type;
  static constexpr Index kSize = Eigen::internal::packet_traits<Scalar>::size;
  static constexpr bool kAvailable = Eigen::internal::packet_traits<Scalar>::Vectorizable &&
                                     Eigen::internal::packet_traits<Scalar>::HasTanh && kSize > 1;

  static bool Usable(Index hidden_size) { return kAvailable && hidden_size % kSize == 0; }

  static Packet Load(const Scalar* p) { return Eigen::internal::ploadu<Packet>(p); }
  static void Store(Scalar* p, const Packet& x) { Eigen::internal::pstoreu(p, x); }
  static Packet Set(Scalar x) { return Eigen::internal::pset1<Packet>(x); }

  // acc[0 .. kBlocks) = rows r0 .. r0 + kBlocks*kSize of bias + W x, W column-major with
  // `rows` rows; columns last to first if kReverse.
  template <int kBlocks, bool kReverse>
  static EIGEN_ALWAYS_INLINE void GemvBlock(const Scalar* w, Index rows, Index cols,
                                            const Scalar* bias, const Scalar* x, Index r0,
                                            Packet* acc) {
    using Eigen::internal::pmadd;
    for (int b = 0; b < kBlocks; ++b) acc[b] = Load(bias + r0 + b * kSize);
    const Scalar* col = w + r0 + (kReverse ? (cols - 1) * rows : 0);
    const Index col_step = kReverse ? -rows : rows;
    const Scalar* xj = kReverse ? x + cols - 1 : x;
    for (Index n = 0; n < cols; ++n, col += col_step, xj += kReverse ? -1 : 1) {
      const Packet xp = Set(*xj);
      for (int b = 0; b < kBlocks; ++b) acc[b] = pmadd(Load(col + b * kSize), xp, acc[b]);
    }
  }

  // gates rows r0 .. r0 + kBlocks*kSize: product, bias and activation.
  template <int kBlocks, bool kReverse>
  static EIGEN_ALWAYS_INLINE void GatesBlock(const Scalar* w, Index rows, Index cols,
                                             const Scalar* bias, const Scalar* x, Index hidden,
                                             Index r0, Scalar* gates) {
    // NOLINTNEXTLINE(modernize-avoid-c-arrays): std::array drops vector attributes
    Packet acc[kBlocks];
    GemvBlock<kBlocks, kReverse>(w, rows, cols, bias, x, r0, acc);
    for (int b = 0; b < kBlocks; ++b) {
      const Index r = r0 + b * kSize;
      Store(gates + r, Activate(acc[b], r / hidden == 2));
    }
  }

  // sigmoid(a) = 0.5 + 0.5 tanh(a / 2) on the i, f, o blocks; tanh(a) on the g block.
  static EIGEN_ALWAYS_INLINE Packet Activate(const Packet& a, bool is_g) {
    using Eigen::internal::pmadd;
    using Eigen::internal::pmul;
    using Eigen::internal::ptanh;
    if (is_g) return ptanh(a);
    const Packet half = Set(Scalar(0.5));
    return pmadd(half, ptanh(pmul(half, a)), half);
  }

  // One cell step. xh = [x; h] (cols entries), c_prev (H); writes the activated gates
  // (4H), c_out, tanh_c_out (may be null) and h_out (H). c_out may alias c_prev.
  // `reverse` walks W from its end: alternating it between consecutive steps re-uses
  // the part of W still in L1 when W is larger than L1 (H = 64: 68 KB).
  static void ForwardStep(const Scalar* w, const Scalar* bias, Index hidden, Index cols,
                          const Scalar* xh, const Scalar* c_prev, bool reverse, Scalar* gates,
                          Scalar* c_out, Scalar* tanh_c_out, Scalar* h_out) {
    using Eigen::internal::padd;
    using Eigen::internal::pmul;
    using Eigen::internal::ptanh;
    const Index rows = 4 * hidden;
    // Row blocks of 8 packets (8 accumulators cover FMA latency x issue width), then 4,
    // then single packets.
    const Index n8 = rows / (8 * kSize), n4 = (rows - n8 * 8 * kSize) / (4 * kSize);
    const Index tail = n8 * 8 * kSize + n4 * 4 * kSize;
    if (!reverse) {
      for (Index b = 0; b < n8; ++b) {
        GatesBlock<8, false>(w, rows, cols, bias, xh, hidden, b * 8 * kSize, gates);
      }
      for (Index b = 0; b < n4; ++b) {
        GatesBlock<4, false>(w, rows, cols, bias, xh, hidden, (n8 * 8 + b * 4) * kSize, gates);
      }
      for (Index r0 = tail; r0 < rows; r0 += kSize) {
        GatesBlock<1, false>(w, rows, cols, bias, xh, hidden, r0, gates);
      }
    } else {
      for (Index r0 = rows - kSize; r0 >= tail; r0 -= kSize) {
        GatesBlock<1, true>(w, rows, cols, bias, xh, hidden, r0, gates);
      }
      for (Index b = n4 - 1; b >= 0; --b) {
        GatesBlock<4, true>(w, rows, cols, bias, xh, hidden, (n8 * 8 + b * 4) * kSize, gates);
      }
      for (Index b = n8 - 1; b >= 0; --b) {
        GatesBlock<8, true>(w, rows, cols, bias, xh, hidden, b * 8 * kSize, gates);
      }
    }
    for (Index u = 0; u < hidden; u += kSize) {
      const Packet i = Load(gates + u), f = Load(gates + hidden + u);
      const Packet g = Load(gates + 2 * hidden + u), o = Load(gates + 3 * hidden + u);
      const Packet c = padd(pmul(f, Load(c_prev + u)), pmul(i, g));
      const Packet tc = ptanh(c);
      Store(c_out + u, c);
      if (tanh_c_out != nullptr) Store(tanh_c_out + u, tc);
      Store(h_out + u, pmul(o, tc));
    }
  }

  // Gate derivatives of one backward step. dh holds dLoss/dh_t from later steps; adds
  // the head's dy_t * w_head, then writes dgates (4H) and updates dc in place from
  // dLoss/dc_t (later steps) to dLoss/dc_{t-1}.
  static EIGEN_ALWAYS_INLINE void BackwardGates(Index hidden, const Scalar* gates,
                                                const Scalar* tanh_c, const Scalar* c_prev,
                                                const Scalar* w_head, Scalar dy, const Scalar* dh,
                                                Scalar* dc, Scalar* dgates) {
    using Eigen::internal::pmadd;
    using Eigen::internal::pmul;
    using Eigen::internal::psub;
    const Packet one = Set(Scalar(1)), dyp = Set(dy);
    for (Index u = 0; u < hidden; u += kSize) {
      const Packet i = Load(gates + u), f = Load(gates + hidden + u);
      const Packet g = Load(gates + 2 * hidden + u), o = Load(gates + 3 * hidden + u);
      const Packet tc = Load(tanh_c + u);
      const Packet dh_u = pmadd(dyp, Load(w_head + u), Load(dh + u));
      const Packet dh_o = pmul(dh_u, o);
      // dc_t = dc (from t+1) + dh * o * (1 - tanh(c)^2)
      const Packet dc_u = pmadd(dh_o, psub(one, pmul(tc, tc)), Load(dc + u));
      Store(dgates + u, pmul(pmul(dc_u, g), pmul(i, psub(one, i))));
      Store(dgates + hidden + u, pmul(pmul(dc_u, Load(c_prev + u)), pmul(f, psub(one, f))));
      Store(dgates + 2 * hidden + u, pmul(pmul(dc_u, i), psub(one, pmul(g, g))));
      Store(dgates + 3 * hidden + u, pmul(pmul(dh_u, tc), pmul(o, psub(one, o))));
      Store(dc + u, pmul(dc_u, f));
    }
  }

  // out (H) = W^T d, W column-major rows x cols (rows = 4H, a multiple of kSize):
  // kGroup dot products at a time, each with its own accumulator.
  template <int kGroup>
  static EIGEN_ALWAYS_INLINE void DotGroup(const Scalar* w, Index rows, const Scalar* d, Index j,
                                           Scalar* out) {
    using Eigen::internal::pmadd;
    // NOLINTNEXTLINE(modernize-avoid-c-arrays): std::array drops vector attributes
    Packet acc[kGroup];
    for (int m = 0; m < kGroup; ++m) acc[m] = Set(Scalar(0));
    const Scalar* col = w + j * rows;
    for (Index r = 0; r < rows; r += kSize) {
      const Packet dr = Load(d + r);
      for (int m = 0; m < kGroup; ++m) acc[m] = pmadd(Load(col + m * rows + r), dr, acc[m]);
    }
    for (int m = 0; m < kGroup; ++m) out[j + m] = Eigen::internal::predux(acc[m]);
  }
  // out[:, j0 .. j0+kCols) rows r0 .. r0 + kRowBlocks*kSize of A B^T, with A rows x k and
  // B cols x k (column-major, leading dimension ldb), summed over all k.
  template <int kRowBlocks, int kCols>
  static EIGEN_ALWAYS_INLINE void OuterBlock(const Scalar* a, Index rows, const Scalar* b,
                                             Index ldb, Index k, Index r0, Index j0, Scalar* out) {
    using Eigen::internal::pmadd;
    // NOLINTNEXTLINE(modernize-avoid-c-arrays): std::array drops vector attributes
    Packet acc[kCols][kRowBlocks];
    for (int c = 0; c < kCols; ++c) {
      for (int rb = 0; rb < kRowBlocks; ++rb) acc[c][rb] = Set(Scalar(0));
    }
    for (Index t = 0; t < k; ++t) {
      // NOLINTNEXTLINE(modernize-avoid-c-arrays): std::array drops vector attributes
      Packet ap[kRowBlocks];
      for (int rb = 0; rb < kRowBlocks; ++rb) ap[rb] = Load(a + t * rows + r0 + rb * kSize);
      const Scalar* bt = b + t * ldb + j0;
      for (int c = 0; c < kCols; ++c) {
        const Packet bc = Set(bt[c]);
        for (int rb = 0; rb < kRowBlocks; ++rb) acc[c][rb] = pmadd(ap[rb], bc, acc[c][rb]);
      }
    }
    for (int c = 0; c < kCols; ++c) {
      for (int rb = 0; rb < kRowBlocks; ++rb) {
        Store(out + (j0 + c) * rows + r0 + rb * kSize, acc[c][rb]);
      }
    }
  }
  // out (rows x cols, column-major) = A B^T; rows must be a multiple of 4 * kSize.
  // Register-blocked 4 packets x 4 columns: each loaded packet of A feeds 4 FMAs.
  static void OuterProduct(const Scalar* a, Index rows, const Scalar* b, Index ldb, Index cols,
                           Index k, Scalar* out) {
    for (Index r0 = 0; r0 < rows; r0 += 4 * kSize) {
      Index j = 0;
      for (; j + 4 <= cols; j += 4) OuterBlock<4, 4>(a, rows, b, ldb, k, r0, j, out);
      // The 1-3 columns left in one block, so its accumulator chains still overlap.
      if (cols - j == 3) OuterBlock<4, 3>(a, rows, b, ldb, k, r0, j, out);
      if (cols - j == 2) OuterBlock<4, 2>(a, rows, b, ldb, k, r0, j, out);
      if (cols - j == 1) OuterBlock<4, 1>(a, rows, b, ldb, k, r0, j, out);
    }
  }

  // Groups last to first if `reverse` (see ForwardStep).
  static EIGEN_ALWAYS_INLINE void TransposedGemv(const Scalar* w, Index rows, Index cols,
                                                 const Scalar* d, bool reverse, Scalar* out) {
    const Index groups = cols / 8;
    if (!reverse) {
      for (Index k = 0; k < groups; ++k) DotGroup<8>(w, rows, d, 8 * k, out);
      for (Index j = 8 * groups; j < cols; ++j) DotGroup<1>(w, rows, d, j, out);
    } else {
      for (Index j = cols - 1; j >= 8 * groups; --j) DotGroup<1>(w, rows, d, j, out);
      for (Index k = groups - 1; k >= 0; --k) DotGroup<8>(w, rows, d, 8 * k, out);
    }
  }
};

}  // namespace

// ---------------------------------------------------------------------------------
// LstmWorkspace

template <typename Scalar>
LstmWorkspace<Scalar>::LstmWorkspace(Index max_input_size, Index max_hidden_size, Index max_steps)
    : max_input_size_(max_input_size), max_hidden_size_(max_hidden_size), max_steps_(max_steps) {
  assert(max_input_size >= 1 && max_hidden_size >= 1 && max_steps >= 1);
  const Index i = max_input_size, h = max_hidden_size, t = max_steps;
  xh_.setZero((i + h) * (t + 1));
  cell_.setZero(h * (t + 1));
  gates_.setZero(4 * h * t);
  tanh_c_.setZero(h * t);
  dgates_.setZero(4 * h * t);
  outputs_.setZero(t);
  dy_.setZero(t);
  dh_.setZero(h);
  dc_.setZero(h);
  act_scale_.setZero(4 * h);
  act_offset_.setZero(4 * h);
  step_xh_.setZero(i + h);
  step_gates_.setZero(4 * h);
  gradient_.setZero(LstmParameterView<Scalar>::Size(i, h));
  staging_inputs_.setZero(i * t);
  staging_targets_.setZero(t);
}

template <typename Scalar>
void LstmWorkspace<Scalar>::PrepareActivation(Index hidden_size) {
  if (activation_hidden_ == hidden_size) return;
  activation_hidden_ = hidden_size;
  // sigmoid(x) = 0.5 + 0.5 tanh(x / 2): all four gate blocks then go through one
  // vectorised tanh, a = scale * tanh(scale * a) + offset.
  const Index h = hidden_size;
  act_scale_.head(4 * h).setConstant(Scalar(0.5));
  act_offset_.head(4 * h).setConstant(Scalar(0.5));
  act_scale_.segment(2 * h, h).setConstant(Scalar(1));
  act_offset_.segment(2 * h, h).setZero();
}

template <typename Scalar>
std::size_t LstmWorkspace<Scalar>::MemoryBytes() const {
  const Index n = xh_.size() + cell_.size() + gates_.size() + tanh_c_.size() + dgates_.size() +
                  outputs_.size() + dy_.size() + dh_.size() + dc_.size() + act_scale_.size() +
                  act_offset_.size() + step_xh_.size() + step_gates_.size() + gradient_.size() +
                  staging_inputs_.size() + staging_targets_.size();
  return static_cast<std::size_t>(n) * sizeof(Scalar);
}

// ---------------------------------------------------------------------------------
// LstmNetwork

template <typename Scalar>
LstmNetwork<Scalar>::LstmNetwork(Index input_size, Index hidden_size)
    : input_size_(input_size), hidden_size_(hidden_size) {
  assert(input_size >= 1 && hidden_size >= 1);
  parameters_.setZero(ParameterCount(input_size, hidden_size));
}

template <typename Scalar>
void LstmNetwork<Scalar>::InitializeUniform(std::uint64_t seed, Scalar forget_bias) {
  const double bound = 1.0 / std::sqrt(static_cast<double>(hidden_size_));
  std::uint64_t state = seed;
  for (Index k = 0; k < parameters_.size(); ++k) {
    parameters_[k] = static_cast<Scalar>(bound * (2.0 * UniformUnit(state) - 1.0));
  }
  view().bias().segment(hidden_size_, hidden_size_).array() += forget_bias;
}

template <typename Scalar>
void LstmNetwork<Scalar>::Step(const Eigen::Ref<const Vector>& input, Eigen::Ref<Vector> h,
                               Eigen::Ref<Vector> c, LstmWorkspace<Scalar>& ws) const {
  const Index in = input_size_, hs = hidden_size_;
  assert(ws.Fits(in, hs, 1) && input.size() == in && h.size() == hs && c.size() == hs);
  ws.PrepareActivation(hs);
  const ConstView p = view();
  Eigen::Map<Vector> xh(ws.step_xh_.data(), in + hs);
  xh.head(in) = input;
  xh.tail(hs) = h;
  if constexpr (Kernels<Scalar>::kAvailable) {
    if (Kernels<Scalar>::Usable(hs)) {
      Kernels<Scalar>::ForwardStep(p.w_stacked().data(), p.bias().data(), hs, in + hs, xh.data(),
                                   c.data(), /*reverse=*/false, ws.step_gates_.data(), c.data(),
                                   nullptr, h.data());
      return;
    }
  }
  Eigen::Map<Vector> a(ws.step_gates_.data(), 4 * hs);
  a = p.bias();
  a.noalias() += p.w_stacked() * xh;
  a.array() =
      ws.act_scale_.head(4 * hs).array() * (ws.act_scale_.head(4 * hs).array() * a.array()).tanh() +
      ws.act_offset_.head(4 * hs).array();
  c.array() =
      a.segment(hs, hs).array() * c.array() + a.head(hs).array() * a.segment(2 * hs, hs).array();
  h.array() = a.tail(hs).array() * c.array().tanh();
}

template <typename Scalar>
Scalar LstmNetwork<Scalar>::Output(const Eigen::Ref<const Vector>& h) const {
  const ConstView p = view();
  return p.w_head().dot(h) + p.b_head();
}

template <typename Scalar>
Scalar LstmNetwork<Scalar>::LossAndGradient(const Eigen::Ref<const Matrix>& inputs,
                                            const Eigen::Ref<const Vector>& targets,
                                            const Eigen::Ref<const Vector>& h0,
                                            const Eigen::Ref<const Vector>& c0,
                                            LstmWorkspace<Scalar>& ws,
                                            Eigen::Ref<Vector> gradient) const {
  const Index in = input_size_, hs = hidden_size_, gs = 4 * hidden_size_, rows = in + hs;
  const Index steps = inputs.cols();
  assert(steps >= 1 && ws.Fits(in, hs, steps) && inputs.rows() == in && targets.size() == steps &&
         h0.size() == hs && c0.size() == hs && gradient.size() == parameter_count());
  ws.PrepareActivation(hs);
  ws.last_input_ = in;
  ws.last_hidden_ = hs;
  ws.last_steps_ = steps;

  using MatrixMap = Eigen::Map<Matrix>;
  using VectorMap = Eigen::Map<Vector>;
  MatrixMap xh(ws.xh_.data(), rows, steps + 1);
  MatrixMap cell(ws.cell_.data(), hs, steps + 1);
  MatrixMap gates(ws.gates_.data(), gs, steps);
  MatrixMap tanh_c(ws.tanh_c_.data(), hs, steps);
  MatrixMap dgates(ws.dgates_.data(), gs, steps);
  VectorMap y(ws.outputs_.data(), steps);
  VectorMap dy(ws.dy_.data(), steps);
  VectorMap dh(ws.dh_.data(), hs);
  VectorMap dc(ws.dc_.data(), hs);
  const auto scale = ws.act_scale_.head(gs).array();
  const auto offset = ws.act_offset_.head(gs).array();

  const ConstView p = view();
  const auto w_stacked = p.w_stacked();
  const auto w_hidden = p.w_hidden();
  const auto bias = p.bias();
  const auto w_head = p.w_head();

  // Forward. Column t of xh is the cell's whole input [x_t; h_t], so each step is one
  // matrix-vector product and the weight gradient below one matrix-matrix product.
  xh.topLeftCorner(in, steps) = inputs;
  xh.col(0).tail(hs) = h0;
  cell.col(0) = c0;
  const bool fast = Kernels<Scalar>::Usable(hs);
  // Alternate the direction W is walked only when W exceeds a typical L1 data cache;
  // when it fits, the forward order lets each step start on the first results earlier.
  constexpr std::size_t kL1Bytes = std::size_t{32} * 1024;
  const bool alternate = static_cast<std::size_t>(w_stacked.size()) * sizeof(Scalar) > kL1Bytes;
  if constexpr (Kernels<Scalar>::kAvailable) {
    for (Index t = 0; t < steps && fast; ++t) {
      Kernels<Scalar>::ForwardStep(w_stacked.data(), bias.data(), hs, rows, xh.col(t).data(),
                                   cell.col(t).data(), /*reverse=*/alternate && (t & 1) != 0,
                                   gates.col(t).data(), cell.col(t + 1).data(),
                                   tanh_c.col(t).data(), xh.col(t + 1).data() + in);
    }
  }
  for (Index t = 0; t < steps && !fast; ++t) {
    auto a = gates.col(t);
    a = bias;
    a.noalias() += w_stacked * xh.col(t);
    a.array() = scale * (scale * a.array()).tanh() + offset;
    cell.col(t + 1).array() = a.segment(hs, hs).array() * cell.col(t).array() +
                              a.head(hs).array() * a.segment(2 * hs, hs).array();
    tanh_c.col(t).array() = cell.col(t + 1).array().tanh();
    xh.col(t + 1).tail(hs).array() = a.tail(hs).array() * tanh_c.col(t).array();
  }

  // Head and loss.
  const auto h_out = xh.block(in, 1, hs, steps);
  y.noalias() = h_out.transpose() * w_head;
  y.array() += p.b_head();
  dy = y - targets;
  const Scalar inv_steps = Scalar(1) / static_cast<Scalar>(steps);
  const Scalar loss = dy.squaredNorm() * inv_steps;
  dy *= Scalar(2) * inv_steps;

  View g(gradient.data(), in, hs);
  g.w_head().noalias() = h_out * dy;
  g.b_head() = dy.sum();

  // Backward through time; dh and dc carry dLoss/dh_t and dLoss/dc_t down the window.
  dh.setZero();
  dc.setZero();
  if constexpr (Kernels<Scalar>::kAvailable) {
    for (Index t = steps - 1; t >= 0 && fast; --t) {
      Kernels<Scalar>::BackwardGates(hs, gates.col(t).data(), tanh_c.col(t).data(),
                                     cell.col(t).data(), w_head.data(), dy[t], dh.data(), dc.data(),
                                     dgates.col(t).data());
      Kernels<Scalar>::TransposedGemv(w_hidden.data(), gs, hs, dgates.col(t).data(),
                                      /*reverse=*/alternate && ((steps - t) & 1) != 0, dh.data());
    }
  }
  for (Index t = steps - 1; t >= 0 && !fast; --t) {
    const auto a = gates.col(t);
    const auto i = a.head(hs).array();
    const auto f = a.segment(hs, hs).array();
    const auto gg = a.segment(2 * hs, hs).array();
    const auto o = a.tail(hs).array();
    const auto tc = tanh_c.col(t).array();
    auto d = dgates.col(t);
    dh += dy[t] * w_head;
    d.tail(hs).array() = dh.array() * tc * o * (Scalar(1) - o);
    dc.array() += dh.array() * o * (Scalar(1) - tc.square());
    d.head(hs).array() = dc.array() * gg * i * (Scalar(1) - i);
    d.segment(hs, hs).array() = dc.array() * cell.col(t).array() * f * (Scalar(1) - f);
    d.segment(2 * hs, hs).array() = dc.array() * i * (Scalar(1) - gg.square());
    dc.array() *= f;
    dh.noalias() = w_hidden.transpose() * d;
  }

  if constexpr (Kernels<Scalar>::kAvailable) {
    if (fast) {
      Kernels<Scalar>::OuterProduct(dgates.data(), gs, xh.data(), rows, rows, steps,
                                    g.w_stacked().data());
    }
  }
  if (!fast) g.w_stacked().noalias() = dgates * xh.leftCols(steps).transpose();
  g.bias().noalias() = dgates.rowwise().sum();
  return loss;
}

template <typename Scalar>
std::size_t LstmNetwork<Scalar>::MemoryBytes() const {
  return static_cast<std::size_t>(parameters_.size()) * sizeof(Scalar);
}

float ClipGradientNorm(Eigen::Ref<Eigen::VectorXf> gradient, float max_norm) {
  return ClipGradientNormImpl<float>(gradient, max_norm);
}
double ClipGradientNorm(Eigen::Ref<Eigen::VectorXd> gradient, double max_norm) {
  return ClipGradientNormImpl<double>(gradient, max_norm);
}

template class LstmWorkspace<float>;
template class LstmWorkspace<double>;
template class LstmNetwork<float>;
template class LstmNetwork<double>;

}  // namespace nightjar::core
