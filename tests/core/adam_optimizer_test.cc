#include "core/adam_optimizer.h"

#include <gtest/gtest.h>

#include <array>
#include <cmath>
#include <string>
#include <vector>

#include "support/reference_data.h"

namespace nightjar::core {
namespace {

using nightjar::testing::LoadReference;
using nightjar::testing::ToVector;

// torch's parameter list, flattened in this order, is one flat vector for the optimizer.
constexpr std::array<const char*, 6> kTorchParameters = {"W_ih", "W_hh", "b_ih",
                                                         "b_hh", "w_y",  "b_y"};

Eigen::VectorXd Flatten(const nlohmann::json& by_name) {
  std::vector<double> flat;
  for (const char* name : kTorchParameters) {
    const std::vector<double> part = ToVector(by_name[name]);
    flat.insert(flat.end(), part.begin(), part.end());
  }
  return Eigen::Map<const Eigen::VectorXd>(flat.data(), static_cast<Eigen::Index>(flat.size()));
}

// Gradient of step k: grads_per_step holds, for each parameter, a list over steps.
Eigen::VectorXd GradientOfStep(const nlohmann::json& grads_per_step, std::size_t k) {
  nlohmann::json by_name;
  for (const char* name : kTorchParameters) by_name[name] = grads_per_step[name][k];
  return Flatten(by_name);
}

// Reference: ../shared/references/lstm_vectors.json "adam": three torch.optim.Adam steps
// (defaults) on the LSTM of references.md §5, each with a freshly computed gradient;
// matches Kingma & Ba Algorithm 1 in numpy to 5.6e-17 (references.md §6).
TEST(AdamOptimizerTest, ThreeStepsMatchTorch) {
  const nlohmann::json json = LoadReference("lstm_vectors.json");
  ASSERT_FALSE(json.is_null());
  const nlohmann::json& adam = json["adam"];
  Eigen::VectorXd theta = Flatten(json["params"]);
  ASSERT_EQ(theta.size(), 16 * 3 + 16 * 4 + 16 + 16 + 4 + 1);

  AdamOptions options;  // the defaults must be the ones torch used
  EXPECT_EQ(options.learning_rate, adam["lr"].get<double>());
  EXPECT_EQ(options.beta1, adam["beta1"].get<double>());
  EXPECT_EQ(options.beta2, adam["beta2"].get<double>());
  EXPECT_EQ(options.epsilon, adam["eps"].get<double>());

  AdamOptimizer<double> optimizer(theta.size(), options);
  for (std::size_t k = 0; k < 3; ++k) {
    optimizer.Step(theta, GradientOfStep(adam["grads_per_step"], k));
    const Eigen::VectorXd expected = Flatten(adam["params_after_step"][k]);
    for (Eigen::Index i = 0; i < theta.size(); ++i) {
      EXPECT_NEAR(theta[i], expected[i], 1e-12) << "step " << k + 1 << " element " << i;
    }
  }
  EXPECT_EQ(optimizer.step_count(), 3);
}

// After the first step m_hat = g and v_hat = g^2, so each element moves by
// lr * |g| / (|g| + eps) against the sign of g (follows from Algorithm 1; references.md §6
// reports 0.000998622..0.000999999 for W_hh).
TEST(AdamOptimizerTest, FirstStepMovesEachElementByLearningRate) {
  Eigen::VectorXd theta = Eigen::VectorXd::Zero(4);
  Eigen::VectorXd g(4);
  g << 1e-3, -2.0, 1e-8, 0.0;
  AdamOptimizer<double> optimizer(4);
  optimizer.Step(theta, g);
  for (Eigen::Index i = 0; i < 4; ++i) {
    const double expected = -1e-3 * g[i] / (std::abs(g[i]) + 1e-8);
    EXPECT_NEAR(theta[i], expected, 1e-18) << i;
  }
  EXPECT_NEAR(theta[2], -0.5e-3, 1e-15);  // |g| = eps halves the step: the plain eps form
}

TEST(AdamOptimizerTest, ResetForgetsMomentsAndFloatAgreesWithDouble) {
  Eigen::VectorXd theta_d = Eigen::VectorXd::LinSpaced(32, -1.0, 1.0);
  Eigen::VectorXf theta_f = theta_d.cast<float>();
  AdamOptimizer<double> opt_d(32, AdamOptions{.learning_rate = 1e-2});
  AdamOptimizer<float> opt_f(32, AdamOptions{.learning_rate = 1e-2});
  for (int k = 0; k < 50; ++k) {
    const Eigen::VectorXd g = theta_d.array().sin() * 0.1 + 0.01 * k;
    opt_d.Step(theta_d, g);
    opt_f.Step(theta_f, g.cast<float>());
  }
  // 50 steps of at most ~lr each: float rounding stays far below 1e-4 (common practice).
  EXPECT_LT((theta_d.cast<float>() - theta_f).cwiseAbs().maxCoeff(), 1e-4f);
  opt_d.Reset();
  EXPECT_EQ(opt_d.step_count(), 0);
  EXPECT_EQ(opt_d.first_moment().squaredNorm(), 0.0);
  EXPECT_EQ(opt_d.second_moment().squaredNorm(), 0.0);
  EXPECT_EQ(opt_f.MemoryBytes(), std::size_t{2} * 32 * sizeof(float));
}

TEST(AdamOptimizerTest, StepDoesNotAllocate) {
  Eigen::VectorXf theta = Eigen::VectorXf::Ones(4641);
  const Eigen::VectorXf g = Eigen::VectorXf::Constant(4641, 0.5f);
  AdamOptimizer<float> optimizer(theta.size());
  Eigen::internal::set_is_malloc_allowed(false);
  optimizer.Step(theta, g);
  optimizer.Step(theta, g);
  Eigen::internal::set_is_malloc_allowed(true);
  EXPECT_LT(theta[0], 1.0f);
}

}  // namespace
}  // namespace nightjar::core
