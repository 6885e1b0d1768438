// AdamOptimizer: Adam (Kingma & Ba 2015, Algorithm 1) on a flat parameter vector.
//
// Plain form of the algorithm, step t = 1, 2, ...:
//   m = beta1 m + (1 - beta1) g          v = beta2 v + (1 - beta2) g^2
//   m_hat = m / (1 - beta1^t)            v_hat = v / (1 - beta2^t)
//   theta = theta - lr * m_hat / (sqrt(v_hat) + epsilon)
// (not the reordered "efficient" variant, whose epsilon acts differently).
// Thread-safety: one thread at a time per optimizer; distinct optimizers are independent.
// Ownership: owns the moment vectors m and v; borrows parameters and gradient per call.
// Step never allocates.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <cstdint>

namespace nightjar::core {

struct AdamOptions {
  double learning_rate = 1e-3;  // alpha; paper default 0.001
  double beta1 = 0.9;           // decay of the first-moment estimate; default 0.9
  double beta2 = 0.999;         // decay of the second-moment estimate; default 0.999
  double epsilon = 1e-8;        // added to sqrt(v_hat); default 1e-8
};

template <typename Scalar>
class AdamOptimizer {
 public:
  using Vector = Eigen::Matrix<Scalar, Eigen::Dynamic, 1>;

  // Moments start at zero. parameter_count >= 1.
  explicit AdamOptimizer(Eigen::Index parameter_count, const AdamOptions& options = {});

  // One update of `parameters` (parameter_count entries) with `gradient`.
  void Step(Eigen::Ref<Vector> parameters, const Eigen::Ref<const Vector>& gradient);

  // Forgets the moments and the step count (as if newly constructed).
  void Reset();

  const AdamOptions& options() const { return options_; }
  void set_learning_rate(double learning_rate) { options_.learning_rate = learning_rate; }
  std::int64_t step_count() const { return step_count_; }
  const Vector& first_moment() const { return m_; }
  const Vector& second_moment() const { return v_; }

  // Heap bytes held (the two moment vectors).
  std::size_t MemoryBytes() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  AdamOptions options_;
  std::int64_t step_count_ = 0;
  double beta1_power_ = 1.0;  // beta1^t, kept in double so 1 - beta^t stays accurate
  double beta2_power_ = 1.0;
  Vector m_;
  Vector v_;
};

extern template class AdamOptimizer<float>;
extern template class AdamOptimizer<double>;

}  // namespace nightjar::core
