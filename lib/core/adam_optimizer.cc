#include "core/adam_optimizer.h"

#include <cassert>

namespace nightjar::core {

template <typename Scalar>
AdamOptimizer<Scalar>::AdamOptimizer(Eigen::Index parameter_count, const AdamOptions& options)
    : options_(options) {
  assert(parameter_count >= 1);
  m_.setZero(parameter_count);
  v_.setZero(parameter_count);
}

template <typename Scalar>
void AdamOptimizer<Scalar>::Step(Eigen::Ref<Vector> parameters,
                                 const Eigen::Ref<const Vector>& gradient) {
  assert(parameters.size() == m_.size() && gradient.size() == m_.size());
  ++step_count_;
  beta1_power_ *= options_.beta1;
  beta2_power_ *= options_.beta2;
  const auto beta1 = static_cast<Scalar>(options_.beta1);
  const auto beta2 = static_cast<Scalar>(options_.beta2);
  const auto one_minus_beta1 = static_cast<Scalar>(1.0 - options_.beta1);
  const auto one_minus_beta2 = static_cast<Scalar>(1.0 - options_.beta2);
  // m_hat = m * c1, v_hat = v * c2: the plain form with the divisions by the bias
  // corrections turned into multiplications by their reciprocals.
  const auto c1 = static_cast<Scalar>(1.0 / (1.0 - beta1_power_));
  const auto c2 = static_cast<Scalar>(1.0 / (1.0 - beta2_power_));
  const auto lr = static_cast<Scalar>(options_.learning_rate);
  const auto eps = static_cast<Scalar>(options_.epsilon);

  m_.array() = beta1 * m_.array() + one_minus_beta1 * gradient.array();
  v_.array() = beta2 * v_.array() + one_minus_beta2 * gradient.array().square();
  parameters.array() -= lr * (c1 * m_.array()) / ((c2 * v_.array()).sqrt() + eps);
}

template <typename Scalar>
void AdamOptimizer<Scalar>::Reset() {
  step_count_ = 0;
  beta1_power_ = 1.0;
  beta2_power_ = 1.0;
  m_.setZero();
  v_.setZero();
}

template <typename Scalar>
std::size_t AdamOptimizer<Scalar>::MemoryBytes() const {
  return static_cast<std::size_t>(m_.size() + v_.size()) * sizeof(Scalar);
}

template class AdamOptimizer<float>;
template class AdamOptimizer<double>;

}  // namespace nightjar::core
