// LstmNetwork: a one-layer LSTM cell with a linear output head, its scratch
// workspace, truncated backpropagation through time and gradient-norm clipping.
//
// The cell is the forget-gate LSTM without peepholes, with exactly the equations of
// torch.nn.LSTMCell (gate row blocks ordered i, f, g, o) and a single bias
// b = b_ih + b_hh:
//   a  = W_input x + W_hidden h + b          (4H rows: blocks i, f, g, o)
//   i = sigmoid(a_i)  f = sigmoid(a_f)  g = tanh(a_g)  o = sigmoid(a_o)
//   c' = f * c + i * g                       h' = o * tanh(c')
//   y  = w_head . h' + b_head
//
// All parameters live in ONE contiguous flat vector so that optimisers and gradient
// clipping work on a single array. Layout (I = input size, H = hidden size):
//   offset 0              W_input   4H x I, column-major
//   offset 4H*I           W_hidden  4H x H, column-major
//   offset 4H*(I+H)       bias      4H
//   offset 4H*(I+H+1)     w_head    H
//   offset 4H*(I+H+1)+H   b_head    1
// Because W_input and W_hidden are both column-major with 4H rows and adjacent,
// together they are the stacked matrix [W_input | W_hidden] (4H x (I+H)); the cell
// multiplies it by the stacked vector [x; h] in one product.
// Gradients use the same layout (LstmParameterView names the parts of any flat vector).
//
// Thread-safety: const member functions of LstmNetwork may run concurrently on
// different threads as long as each thread passes its own LstmWorkspace. A workspace
// is used by one thread at a time.
// Ownership: LstmNetwork owns its parameter vector; LstmWorkspace owns its scratch;
// functions borrow their arguments only for the duration of the call.
// No function here allocates after construction, throws, or does I/O.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>
#include <type_traits>

namespace nightjar::core {

template <typename Scalar>
class LstmNetwork;

// Named views (Eigen::Map) over a flat parameter or gradient vector in the layout above.
// Scalar may be const-qualified for read-only views. Borrows the buffer.
template <typename Scalar>
class LstmParameterView {
 public:
  using Value = std::remove_const_t<Scalar>;
  using Matrix = Eigen::Matrix<Value, Eigen::Dynamic, Eigen::Dynamic>;
  using Vector = Eigen::Matrix<Value, Eigen::Dynamic, 1>;
  using MatrixMap = Eigen::Map<std::conditional_t<std::is_const_v<Scalar>, const Matrix, Matrix>>;
  using VectorMap = Eigen::Map<std::conditional_t<std::is_const_v<Scalar>, const Vector, Vector>>;

  // Parameter count of a network with these sizes.
  static constexpr Eigen::Index Size(Eigen::Index input_size, Eigen::Index hidden_size) {
    return 4 * hidden_size * (input_size + hidden_size + 1) + hidden_size + 1;
  }

  LstmParameterView(Scalar* flat, Eigen::Index input_size, Eigen::Index hidden_size)
      : flat_(flat), input_size_(input_size), hidden_size_(hidden_size) {}

  MatrixMap w_input() const { return MatrixMap(flat_, 4 * hidden_size_, input_size_); }
  MatrixMap w_hidden() const {
    return MatrixMap(flat_ + 4 * hidden_size_ * input_size_, 4 * hidden_size_, hidden_size_);
  }
  // [W_input | W_hidden], 4H x (I+H).
  MatrixMap w_stacked() const {
    return MatrixMap(flat_, 4 * hidden_size_, input_size_ + hidden_size_);
  }
  VectorMap bias() const { return VectorMap(flat_ + BiasOffset(), 4 * hidden_size_); }
  VectorMap w_head() const { return VectorMap(flat_ + HeadOffset(), hidden_size_); }
  Scalar& b_head() const { return flat_[HeadOffset() + hidden_size_]; }

  Eigen::Index BiasOffset() const { return 4 * hidden_size_ * (input_size_ + hidden_size_); }
  Eigen::Index HeadOffset() const { return BiasOffset() + 4 * hidden_size_; }
  Eigen::Index size() const { return Size(input_size_, hidden_size_); }

 private:
  Scalar* flat_;
  Eigen::Index input_size_;
  Eigen::Index hidden_size_;
};

// Per-thread scratch for LstmNetwork: gate activations and cell states for up to
// max_steps steps, the gradient buffer, and staging space for a training window.
// One workspace serves every network (channel) a worker thread owns whose sizes fit,
// so each channel keeps only its weights and state. Results of the last
// LossAndGradient call stay readable here until the next LossAndGradient call
// (Step uses separate scratch and does not disturb them).
template <typename Scalar>
class LstmWorkspace {
 public:
  using Vector = Eigen::Matrix<Scalar, Eigen::Dynamic, 1>;
  using Matrix = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic>;
  using VectorMap = Eigen::Map<Vector>;
  using MatrixMap = Eigen::Map<Matrix>;
  using ConstVectorMap = Eigen::Map<const Vector>;

  // Allocates everything up front; sizes must be >= 1.
  LstmWorkspace(Eigen::Index max_input_size, Eigen::Index max_hidden_size, Eigen::Index max_steps);

  // True if a network with these sizes can use this workspace for windows of `steps`.
  bool Fits(Eigen::Index input_size, Eigen::Index hidden_size, Eigen::Index steps) const {
    return input_size <= max_input_size_ && hidden_size <= max_hidden_size_ && steps <= max_steps_;
  }
  Eigen::Index max_input_size() const { return max_input_size_; }
  Eigen::Index max_hidden_size() const { return max_hidden_size_; }
  Eigen::Index max_steps() const { return max_steps_; }

  // Gradient buffer for callers (flat layout, parameter_count entries).
  VectorMap gradient(Eigen::Index parameter_count) {
    return VectorMap(gradient_.data(), parameter_count);
  }
  // Staging space where a caller can assemble a training window (inputs I x T, targets T).
  MatrixMap staging_inputs(Eigen::Index input_size, Eigen::Index steps) {
    return MatrixMap(staging_inputs_.data(), input_size, steps);
  }
  VectorMap staging_targets(Eigen::Index steps) {
    return VectorMap(staging_targets_.data(), steps);
  }

  // Results of the last LossAndGradient call, for t in [0, T]: hidden_state(0) is h0,
  // hidden_state(t) the state after input t-1; likewise cell_state. outputs() holds y_t.
  ConstVectorMap hidden_state(Eigen::Index t) const {
    return ConstVectorMap(xh_.data() + t * (last_input_ + last_hidden_) + last_input_,
                          last_hidden_);
  }
  ConstVectorMap cell_state(Eigen::Index t) const {
    return ConstVectorMap(cell_.data() + t * last_hidden_, last_hidden_);
  }
  ConstVectorMap outputs() const { return ConstVectorMap(outputs_.data(), last_steps_); }
  // Gradient of the loss with respect to h0 and c0.
  ConstVectorMap grad_h0() const { return ConstVectorMap(dh_.data(), last_hidden_); }
  ConstVectorMap grad_c0() const { return ConstVectorMap(dc_.data(), last_hidden_); }

  // Heap bytes held by this workspace.
  std::size_t MemoryBytes() const;

 private:
  friend class LstmNetwork<Scalar>;

  // Fills act_scale_/act_offset_ for hidden size h (see LstmNetwork::Activate).
  void PrepareActivation(Eigen::Index hidden_size);

  Eigen::Index max_input_size_;
  Eigen::Index max_hidden_size_;
  Eigen::Index max_steps_;
  Eigen::Index last_input_ = 0;
  Eigen::Index last_hidden_ = 0;
  Eigen::Index last_steps_ = 0;
  Eigen::Index activation_hidden_ = 0;  // hidden size act_scale_ is built for

  Vector xh_;          // (I+H) x (T+1): column t = [x_t; h_t], h_t the state before input t
  Vector cell_;        // H x (T+1): c_t
  Vector gates_;       // 4H x T: activated gates i, f, g, o per step
  Vector tanh_c_;      // H x T: tanh(c_{t+1})
  Vector dgates_;      // 4H x T: dLoss/d(pre-activation) per step
  Vector outputs_;     // T: y_t
  Vector dy_;          // T: dLoss/dy_t
  Vector dh_;          // H: running dLoss/dh, finally dLoss/dh0
  Vector dc_;          // H: running dLoss/dc, finally dLoss/dc0
  Vector act_scale_;   // 4H: 0.5 on sigmoid blocks, 1 on the tanh block
  Vector act_offset_;  // 4H: 0.5 on sigmoid blocks, 0 on the tanh block
  Vector step_xh_;     // I+H: [x; h] for Step
  Vector step_gates_;  // 4H: gates for Step
  Vector gradient_;
  Vector staging_inputs_;
  Vector staging_targets_;
};

template <typename Scalar>
class LstmNetwork {
 public:
  using Vector = Eigen::Matrix<Scalar, Eigen::Dynamic, 1>;
  using Matrix = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic>;
  using View = LstmParameterView<Scalar>;
  using ConstView = LstmParameterView<const Scalar>;

  // All parameters zero. Sizes must be >= 1.
  LstmNetwork(Eigen::Index input_size, Eigen::Index hidden_size);

  static constexpr Eigen::Index ParameterCount(Eigen::Index input_size, Eigen::Index hidden_size) {
    return View::Size(input_size, hidden_size);
  }

  Eigen::Index input_size() const { return input_size_; }
  Eigen::Index hidden_size() const { return hidden_size_; }
  Eigen::Index parameter_count() const { return parameters_.size(); }

  // The flat parameter vector (layout in the file comment). Do not resize it.
  Vector& parameters() { return parameters_; }
  const Vector& parameters() const { return parameters_; }
  View view() { return View(parameters_.data(), input_size_, hidden_size_); }
  ConstView view() const { return ConstView(parameters_.data(), input_size_, hidden_size_); }

  // Every parameter ~ U(-1/sqrt(H), 1/sqrt(H)) (torch's LSTMCell and Linear bound for
  // fan-in H), drawn in flat order from splitmix64, so the result is the same on every
  // platform and library version; then forget_bias is added to the forget-gate bias.
  void InitializeUniform(std::uint64_t seed, Scalar forget_bias);

  // Advances (h, c) by one input (sizes I, H, H). Uses ws's step scratch only.
  void Step(const Eigen::Ref<const Vector>& input, Eigen::Ref<Vector> h, Eigen::Ref<Vector> c,
            LstmWorkspace<Scalar>& ws) const;

  // The head: w_head . h + b_head.
  Scalar Output(const Eigen::Ref<const Vector>& h) const;

  // Truncated BPTT over one window. From (h0, c0) runs the cell over the T columns of
  // `inputs` (I x T, 1 <= T <= ws.max_steps()), with loss = mean_t (y_t - target_t)^2
  // where y_t is the head applied to the state after input t. Writes dLoss/dparameters
  // into `gradient` (flat layout, parameter_count() entries, overwritten) and leaves
  // dLoss/dh0, dLoss/dc0 and the forward states in ws. Returns the loss.
  // Pass plain column-major storage (Matrix, Map or a column block): other expressions
  // would make Eigen::Ref copy them into a heap temporary.
  Scalar LossAndGradient(const Eigen::Ref<const Matrix>& inputs,
                         const Eigen::Ref<const Vector>& targets,
                         const Eigen::Ref<const Vector>& h0, const Eigen::Ref<const Vector>& c0,
                         LstmWorkspace<Scalar>& ws, Eigen::Ref<Vector> gradient) const;

  // Heap bytes held (the parameter vector).
  std::size_t MemoryBytes() const;

 private:
  Eigen::Index input_size_;
  Eigen::Index hidden_size_;
  Vector parameters_;
};

// Scales `gradient` so its Euclidean norm is at most max_norm (no-op if it already is,
// or if max_norm <= 0). Returns the norm before clipping; a non-finite return means the
// gradient is unusable and was left as is.
float ClipGradientNorm(Eigen::Ref<Eigen::VectorXf> gradient, float max_norm);
double ClipGradientNorm(Eigen::Ref<Eigen::VectorXd> gradient, double max_norm);

extern template class LstmWorkspace<float>;
extern template class LstmWorkspace<double>;
extern template class LstmNetwork<float>;
extern template class LstmNetwork<double>;

}  // namespace nightjar::core
