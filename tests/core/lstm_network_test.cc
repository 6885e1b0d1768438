#include "core/lstm_network.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <vector>

#include "support/reference_data.h"

namespace nightjar::core {
namespace {

// Allocation checks: with set_is_malloc_allowed(false) Eigen aborts on any heap
// allocation, but only where eigen_assert is live (builds without NDEBUG, e.g. the
// sanitizer job); AllocationCounter sees operator new in every build, not Eigen's malloc.

using Eigen::Index;
using nightjar::testing::LoadReference;
using nightjar::testing::ToVector;

// All reference values below: ../shared/references/lstm_vectors.json, computed with
// torch 1.13 (torch.nn.LSTMCell + Linear head, float64, autograd gradients; cross-checked
// there against an independent numpy forward/BPTT and torch.autograd.gradcheck),
// references.md §5. Tolerances as suggested there: 1e-12 in double, 1e-5 in float.

template <typename Scalar>
using Vec = Eigen::Matrix<Scalar, Eigen::Dynamic, 1>;
template <typename Scalar>
using Mat = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic>;

// A nested JSON list (rows x cols, row-major) as a column-major matrix.
template <typename Scalar>
Mat<Scalar> ToMatrix(const nlohmann::json& json, Index rows, Index cols) {
  const std::vector<double> flat = ToVector(json);
  EXPECT_EQ(static_cast<Index>(flat.size()), rows * cols);
  Mat<Scalar> out(rows, cols);
  for (Index r = 0; r < rows; ++r) {
    for (Index c = 0; c < cols; ++c) {
      out(r, c) = static_cast<Scalar>(flat[static_cast<std::size_t>(r * cols + c)]);
    }
  }
  return out;
}

template <typename Scalar>
Vec<Scalar> ToVec(const nlohmann::json& json) {
  const std::vector<double> flat = ToVector(json);
  Vec<Scalar> out(static_cast<Index>(flat.size()));
  for (Index k = 0; k < out.size(); ++k) {
    out[k] = static_cast<Scalar>(flat[static_cast<std::size_t>(k)]);
  }
  return out;
}

// Non-template accessors, so templates below need no `.template get<>`.
double Number(const nlohmann::json& json) { return json.get<double>(); }
Index Count(const nlohmann::json& json) { return json.get<Index>(); }

// The reference problem: network, inputs (I x T), targets, h0, c0.
template <typename Scalar>
struct Problem {
  nlohmann::json json;
  Index input_size = 0;
  Index hidden_size = 0;
  Index steps = 0;
  LstmNetwork<Scalar> network{1, 1};
  Mat<Scalar> inputs;
  Vec<Scalar> targets;
  Vec<Scalar> h0;
  Vec<Scalar> c0;
};

template <typename Scalar>
Problem<Scalar> LoadProblem() {
  Problem<Scalar> p;
  p.json = LoadReference("lstm_vectors.json");
  if (p.json.is_null()) return p;
  p.input_size = Count(p.json["input_size"]);
  p.hidden_size = Count(p.json["hidden_size"]);
  p.steps = Count(p.json["steps"]);
  const Index in = p.input_size, hs = p.hidden_size, gs = 4 * hs;
  p.network = LstmNetwork<Scalar>(in, hs);
  const auto& params = p.json["params"];
  auto view = p.network.view();
  view.w_input() = ToMatrix<Scalar>(params["W_ih"], gs, in);
  view.w_hidden() = ToMatrix<Scalar>(params["W_hh"], gs, hs);
  // torch keeps two biases that simply add.
  view.bias() = ToVec<Scalar>(params["b_ih"]) + ToVec<Scalar>(params["b_hh"]);
  view.w_head() = ToVec<Scalar>(params["w_y"]);
  view.b_head() = ToVec<Scalar>(params["b_y"])[0];
  p.inputs = ToMatrix<Scalar>(p.json["x"], p.steps, in).transpose();
  p.targets = ToVec<Scalar>(p.json["target"]);
  p.h0 = ToVec<Scalar>(p.json["h0"]);
  p.c0 = ToVec<Scalar>(p.json["c0"]);
  return p;
}

template <typename Scalar>
void ExpectNear(const Eigen::Ref<const Mat<Scalar>>& actual, const Mat<Scalar>& expected,
                double tolerance, const char* what) {
  ASSERT_EQ(actual.rows(), expected.rows()) << what;
  ASSERT_EQ(actual.cols(), expected.cols()) << what;
  for (Index r = 0; r < actual.rows(); ++r) {
    for (Index c = 0; c < actual.cols(); ++c) {
      EXPECT_NEAR(static_cast<double>(actual(r, c)), static_cast<double>(expected(r, c)), tolerance)
          << what << "(" << r << ", " << c << ")";
    }
  }
}

template <typename Scalar>
void CheckForward(double tolerance) {
  Problem<Scalar> p = LoadProblem<Scalar>();
  ASSERT_FALSE(p.json.is_null());
  const Index hs = p.hidden_size, steps = p.steps;
  LstmWorkspace<Scalar> ws(p.input_size, hs, steps);
  Vec<Scalar> gradient(p.network.parameter_count());
  const Scalar loss = p.network.LossAndGradient(p.inputs, p.targets, p.h0, p.c0, ws, gradient);

  const Mat<Scalar> expected_h = ToMatrix<Scalar>(p.json["expected"]["h"], steps, hs);
  const Mat<Scalar> expected_c = ToMatrix<Scalar>(p.json["expected"]["c"], steps, hs);
  const Vec<Scalar> expected_y = ToVec<Scalar>(p.json["expected"]["y"]);
  Mat<Scalar> h(hs, steps), c(hs, steps);
  for (Index t = 0; t < steps; ++t) {
    h.col(t) = ws.hidden_state(t + 1);
    c.col(t) = ws.cell_state(t + 1);
  }
  ExpectNear<Scalar>(h, expected_h.transpose(), tolerance, "h");
  ExpectNear<Scalar>(c, expected_c.transpose(), tolerance, "c");
  ExpectNear<Scalar>(ws.outputs(), expected_y, tolerance, "y");
  EXPECT_NEAR(static_cast<double>(loss), Number(p.json["expected"]["loss"]), tolerance);

  // Step and Output, the inference path, give the same states and outputs.
  Vec<Scalar> hh = p.h0, cc = p.c0;
  for (Index t = 0; t < steps; ++t) {
    p.network.Step(p.inputs.col(t), hh, cc, ws);
    ExpectNear<Scalar>(hh, expected_h.row(t).transpose(), tolerance, "Step h");
    ExpectNear<Scalar>(cc, expected_c.row(t).transpose(), tolerance, "Step c");
    EXPECT_NEAR(static_cast<double>(p.network.Output(hh)), static_cast<double>(expected_y[t]),
                tolerance);
  }
}

template <typename Scalar>
void CheckGradient(double tolerance) {
  Problem<Scalar> p = LoadProblem<Scalar>();
  ASSERT_FALSE(p.json.is_null());
  const Index in = p.input_size, hs = p.hidden_size, gs = 4 * hs;
  LstmWorkspace<Scalar> ws(in, hs, p.steps);
  Vec<Scalar> gradient(p.network.parameter_count());
  p.network.LossAndGradient(p.inputs, p.targets, p.h0, p.c0, ws, gradient);

  const auto& grad = p.json["grad"];
  const LstmParameterView<const Scalar> g(gradient.data(), in, hs);
  ExpectNear<Scalar>(g.w_input(), ToMatrix<Scalar>(grad["W_ih"], gs, in), tolerance, "dW_ih");
  ExpectNear<Scalar>(g.w_hidden(), ToMatrix<Scalar>(grad["W_hh"], gs, hs), tolerance, "dW_hh");
  // The single bias gets the gradient of either torch bias (they are equal).
  ExpectNear<Scalar>(g.bias(), ToVec<Scalar>(grad["b_ih"]), tolerance, "db");
  ExpectNear<Scalar>(g.bias(), ToVec<Scalar>(grad["b_hh"]), tolerance, "db_hh");
  ExpectNear<Scalar>(g.w_head(), ToVec<Scalar>(grad["w_y"]), tolerance, "dw_y");
  EXPECT_NEAR(static_cast<double>(g.b_head()), Number(grad["b_y"][0]), tolerance);
  ExpectNear<Scalar>(ws.grad_h0(), ToVec<Scalar>(grad["h0"]), tolerance, "dh0");
  ExpectNear<Scalar>(ws.grad_c0(), ToVec<Scalar>(grad["c0"]), tolerance, "dc0");
}

TEST(LstmNetworkTest, ForwardMatchesTorchInDouble) { CheckForward<double>(1e-12); }
TEST(LstmNetworkTest, ForwardMatchesTorchInFloat) { CheckForward<float>(1e-5); }
TEST(LstmNetworkTest, GradientMatchesTorchInDouble) { CheckGradient<double>(1e-12); }
TEST(LstmNetworkTest, GradientMatchesTorchInFloat) { CheckGradient<float>(1e-5); }

// The reference network (H = 4) embedded in a float network with H = 16 or 32 whose
// extra units have all-zero weights: those units stay at c = h = 0 and have zero
// gradients, so the real units must reproduce the torch values exactly. H a multiple of
// the packet size runs the vectorised kernels, which the H = 4 tests above do not.
void CheckPaddedFloat(Index padded_hidden) {
  Problem<double> p = LoadProblem<double>();
  ASSERT_FALSE(p.json.is_null());
  const Index in = p.input_size, hs = p.hidden_size, steps = p.steps, big = padded_hidden;
  LstmNetwork<float> net(in, big);
  auto dst = net.view();
  const auto src = p.network.view();
  for (Index gate = 0; gate < 4; ++gate) {
    dst.w_input().middleRows(gate * big, hs) =
        src.w_input().middleRows(gate * hs, hs).cast<float>();
    dst.w_hidden().block(gate * big, 0, hs, hs) =
        src.w_hidden().middleRows(gate * hs, hs).cast<float>();
    dst.bias().segment(gate * big, hs) = src.bias().segment(gate * hs, hs).cast<float>();
  }
  dst.w_head().head(hs) = src.w_head().cast<float>();
  dst.b_head() = static_cast<float>(src.b_head());
  Vec<float> h0 = Vec<float>::Zero(big), c0 = Vec<float>::Zero(big);
  h0.head(hs) = p.h0.cast<float>();
  c0.head(hs) = p.c0.cast<float>();

  LstmWorkspace<float> ws(in, big, steps);
  Vec<float> gradient(net.parameter_count());
  const Mat<float> inputs = p.inputs.cast<float>();
  const Vec<float> targets = p.targets.cast<float>();
  const float loss = net.LossAndGradient(inputs, targets, h0, c0, ws, gradient);
  const double tolerance = 1e-5;
  EXPECT_NEAR(static_cast<double>(loss), Number(p.json["expected"]["loss"]), tolerance);
  const Mat<float> expected_h = ToMatrix<float>(p.json["expected"]["h"], steps, hs);
  const Mat<float> expected_c = ToMatrix<float>(p.json["expected"]["c"], steps, hs);
  Vec<float> hh = h0, cc = c0;
  for (Index t = 0; t < steps; ++t) {
    ExpectNear<float>(ws.hidden_state(t + 1).head(hs), expected_h.row(t).transpose(), tolerance,
                      "h");
    ExpectNear<float>(ws.cell_state(t + 1).head(hs), expected_c.row(t).transpose(), tolerance, "c");
    EXPECT_EQ(ws.hidden_state(t + 1).tail(big - hs).squaredNorm(), 0.0f);
    net.Step(inputs.col(t), hh, cc, ws);
    ExpectNear<float>(hh.head(hs), expected_h.row(t).transpose(), tolerance, "Step h");
    ExpectNear<float>(cc.head(hs), expected_c.row(t).transpose(), tolerance, "Step c");
  }
  const auto& grad = p.json["grad"];
  const LstmParameterView<const float> g(gradient.data(), in, big);
  Vec<float> expected_gradient = Vec<float>::Zero(net.parameter_count());
  LstmParameterView<float> e(expected_gradient.data(), in, big);
  const Mat<float> dw_ih = ToMatrix<float>(grad["W_ih"], 4 * hs, in);
  const Mat<float> dw_hh = ToMatrix<float>(grad["W_hh"], 4 * hs, hs);
  const Vec<float> db = ToVec<float>(grad["b_ih"]);
  for (Index gate = 0; gate < 4; ++gate) {
    e.w_input().middleRows(gate * big, hs) = dw_ih.middleRows(gate * hs, hs);
    e.w_hidden().block(gate * big, 0, hs, hs) = dw_hh.middleRows(gate * hs, hs);
    e.bias().segment(gate * big, hs) = db.segment(gate * hs, hs);
  }
  e.w_head().head(hs) = ToVec<float>(grad["w_y"]);
  e.b_head() = static_cast<float>(Number(grad["b_y"][0]));
  ExpectNear<float>(gradient, expected_gradient, tolerance, "gradient");
  ExpectNear<float>(ws.grad_h0().head(hs), ToVec<float>(grad["h0"]), tolerance, "dh0");
  ExpectNear<float>(ws.grad_c0().head(hs), ToVec<float>(grad["c0"]), tolerance, "dc0");
}

TEST(LstmNetworkTest, VectorisedFloatPathMatchesTorchPaddedTo16) { CheckPaddedFloat(16); }
TEST(LstmNetworkTest, VectorisedFloatPathMatchesTorchPaddedTo32) { CheckPaddedFloat(32); }

// The float kernels against the double path (itself checked against torch and finite
// differences above) on a full random network with H = 32, T = 32. Float keeps ~7
// significant digits; 1e-5 relative to the largest entry is common practice for fp32.
TEST(LstmNetworkTest, FloatKernelsAgreeWithDoubleOnRandomNetwork) {
  const Index in = 3, hs = 32, steps = 32;
  LstmNetwork<double> net_d(in, hs);
  net_d.InitializeUniform(11, 1.0);
  LstmNetwork<float> net_f(in, hs);
  net_f.parameters() = net_d.parameters().cast<float>();
  Mat<double> inputs(in, steps);
  for (Index t = 0; t < steps; ++t) {
    inputs(0, t) = std::sin(0.3 * static_cast<double>(t));
    inputs(1, t) = std::cos(0.05 * static_cast<double>(t));
    inputs(2, t) = 0.5;
  }
  const Vec<double> targets = inputs.row(0).transpose().array() * 0.8 + 0.1;
  const Vec<double> h0 = Vec<double>::Constant(hs, 0.05), c0 = Vec<double>::Constant(hs, -0.1);
  LstmWorkspace<double> ws_d(in, hs, steps);
  LstmWorkspace<float> ws_f(in, hs, steps);
  Vec<double> g_d(net_d.parameter_count());
  Vec<float> g_f(net_f.parameter_count());
  const double l_d = net_d.LossAndGradient(inputs, targets, h0, c0, ws_d, g_d);
  const float l_f = net_f.LossAndGradient(inputs.cast<float>(), targets.cast<float>(),
                                          h0.cast<float>(), c0.cast<float>(), ws_f, g_f);
  EXPECT_NEAR(static_cast<double>(l_f), l_d, 1e-5 * l_d);
  const double scale = g_d.cwiseAbs().maxCoeff();
  EXPECT_LT((g_f.cast<double>() - g_d).cwiseAbs().maxCoeff(), 1e-5 * scale);
  EXPECT_LT((Vec<float>(ws_f.grad_h0()).cast<double>() - Vec<double>(ws_d.grad_h0()))
                .cwiseAbs()
                .maxCoeff(),
            1e-5 * scale);
  // The inference step agrees too.
  Vec<double> h_d = h0, c_d = c0;
  Vec<float> h_f = h0.cast<float>(), c_f = c0.cast<float>();
  for (Index t = 0; t < steps; ++t) {
    net_d.Step(inputs.col(t), h_d, c_d, ws_d);
    net_f.Step(inputs.col(t).cast<float>(), h_f, c_f, ws_f);
  }
  EXPECT_LT((h_f.cast<double>() - h_d).cwiseAbs().maxCoeff(), 1e-5);
  EXPECT_NEAR(static_cast<double>(net_f.Output(h_f)), net_d.Output(h_d), 1e-5);
}

TEST(LstmNetworkTest, LayoutIsDocumentedFlatOrder) {
  // I = 2, H = 3: W_input 12x2 at 0, W_hidden 12x3 at 24, bias at 60, w_head at 72,
  // b_head at 75; 76 parameters.
  LstmNetwork<double> net(2, 3);
  EXPECT_EQ(net.parameter_count(), 76);
  EXPECT_EQ((LstmNetwork<double>::ParameterCount(3, 32)), 4 * 32 * (3 + 32 + 1) + 32 + 1);
  auto v = net.view();
  const double* base = net.parameters().data();
  EXPECT_EQ(v.w_input().data(), base);
  EXPECT_EQ(v.w_hidden().data(), base + 24);
  EXPECT_EQ(v.bias().data(), base + 60);
  EXPECT_EQ(v.w_head().data(), base + 72);
  EXPECT_EQ(&v.b_head(), base + 75);
  v.w_input()(1, 0) = 5.0;   // column-major: row 1 of column 0 is flat index 1
  v.w_hidden()(0, 1) = 7.0;  // column 1 starts 12 further on
  EXPECT_EQ(net.parameters()[1], 5.0);
  EXPECT_EQ(net.parameters()[24 + 12], 7.0);
}

TEST(LstmNetworkTest, InitializeUniformIsBoundedSeededAndSetsForgetBias) {
  const Index in = 3, hs = 16;
  LstmNetwork<double> a(in, hs), b(in, hs), c(in, hs);
  a.InitializeUniform(42, 1.0);
  b.InitializeUniform(42, 1.0);
  c.InitializeUniform(43, 1.0);
  EXPECT_EQ(a.parameters(), b.parameters());
  EXPECT_NE(a.parameters(), c.parameters());
  // Bound 1/sqrt(H) as in torch.nn.LSTMCell (torch documentation, read; references.md §5).
  const double bound = 1.0 / std::sqrt(static_cast<double>(hs));
  auto v = a.view();
  Vec<double> forget = v.bias().segment(hs, hs);
  v.bias().segment(hs, hs).array() -= 1.0;
  EXPECT_LE(a.parameters().cwiseAbs().maxCoeff(), bound);
  // Mean of U(-b, b) is 0 with sd b/sqrt(3); over 1153 draws the sample mean is within
  // 4 standard errors of 0 (common practice for a sanity check of a uniform generator).
  const auto n = static_cast<double>(a.parameter_count());
  EXPECT_LT(std::abs(a.parameters().mean()), 4.0 * bound / std::sqrt(3.0 * n));
  EXPECT_GT(forget.minCoeff(), 1.0 - bound);
  // float and double draw the same numbers (rounded).
  LstmNetwork<float> f(in, hs);
  f.InitializeUniform(42, 0.0f);
  b.InitializeUniform(42, 0.0);
  EXPECT_EQ(f.parameters(), b.parameters().cast<float>());
}

// Central finite differences on a random small network, in double. The truncation
// error of the central difference is O(eps^2) (common practice): with eps = 1e-6 and
// O(1) curvature the difference quotient is good to ~1e-9.
TEST(LstmNetworkTest, GradientMatchesFiniteDifferences) {
  const Index in = 2, hs = 3, steps = 5;
  LstmNetwork<double> net(in, hs);
  net.InitializeUniform(7, 0.5);
  net.parameters() *= 2.0;  // larger weights exercise the nonlinearities more
  std::uint64_t s = 99;
  auto next = [&s]() {  // deterministic values in [-1, 1)
    s = s * 6364136223846793005ULL + 1442695040888963407ULL;
    return static_cast<double>(s >> 11) * 0x1.0p-52 - 1.0;
  };
  Mat<double> inputs(in, steps);
  for (Index k = 0; k < inputs.size(); ++k) inputs.data()[k] = next();
  Vec<double> targets(steps), h0(hs), c0(hs);
  for (Index k = 0; k < steps; ++k) targets[k] = next();
  for (Index k = 0; k < hs; ++k) h0[k] = 0.5 * next();
  for (Index k = 0; k < hs; ++k) c0[k] = 0.5 * next();

  LstmWorkspace<double> ws(in, hs, steps);
  Vec<double> gradient(net.parameter_count()), scratch(net.parameter_count());
  net.LossAndGradient(inputs, targets, h0, c0, ws, gradient);
  const Vec<double> grad_h0 = ws.grad_h0(), grad_c0 = ws.grad_c0();
  auto loss = [&](const LstmNetwork<double>& n, const Vec<double>& h, const Vec<double>& c) {
    return n.LossAndGradient(inputs, targets, h, c, ws, scratch);
  };

  const double eps = 1e-6, tolerance = 1e-8;
  for (Index k = 0; k < net.parameter_count(); ++k) {
    LstmNetwork<double> plus = net, minus = net;
    plus.parameters()[k] += eps;
    minus.parameters()[k] -= eps;
    const double numeric = (loss(plus, h0, c0) - loss(minus, h0, c0)) / (2.0 * eps);
    EXPECT_NEAR(gradient[k], numeric, tolerance) << "parameter " << k;
  }
  for (Index k = 0; k < hs; ++k) {
    Vec<double> plus = h0, minus = h0;
    plus[k] += eps;
    minus[k] -= eps;
    EXPECT_NEAR(grad_h0[k], (loss(net, plus, c0) - loss(net, minus, c0)) / (2.0 * eps), tolerance);
    plus = c0;
    minus = c0;
    plus[k] += eps;
    minus[k] -= eps;
    EXPECT_NEAR(grad_c0[k], (loss(net, h0, plus) - loss(net, h0, minus)) / (2.0 * eps), tolerance);
  }
}

// A shorter window of a bigger workspace, and a workspace shared by two network sizes,
// give the same results as exact-size workspaces.
TEST(LstmNetworkTest, WorkspaceServesSmallerNetworksAndWindows) {
  LstmNetwork<float> small(2, 5), large(3, 8);
  small.InitializeUniform(1, 1.0f);
  large.InitializeUniform(2, 1.0f);
  LstmWorkspace<float> shared(3, 8, 16);
  for (LstmNetwork<float>* net : {&small, &large, &small}) {
    const Index in = net->input_size(), hs = net->hidden_size(), steps = 7;
    Mat<float> inputs = Mat<float>::Constant(in, steps, 0.25f);
    inputs.row(0).setLinSpaced(-1.0f, 1.0f);
    const Vec<float> targets = Vec<float>::LinSpaced(steps, 0.5f, -0.5f);
    const Vec<float> h0 = Vec<float>::Constant(hs, 0.1f), c0 = Vec<float>::Constant(hs, -0.2f);
    LstmWorkspace<float> exact(in, hs, steps);
    Vec<float> g_exact(net->parameter_count()), g_shared(net->parameter_count());
    const float l_exact = net->LossAndGradient(inputs, targets, h0, c0, exact, g_exact);
    const float l_shared = net->LossAndGradient(inputs, targets, h0, c0, shared, g_shared);
    EXPECT_EQ(l_exact, l_shared);
    EXPECT_EQ(g_exact, g_shared);
    EXPECT_EQ(Vec<float>(exact.grad_h0()), Vec<float>(shared.grad_h0()));
  }
}

TEST(LstmNetworkTest, ClipGradientNormScalesOnlyLongVectors) {
  Eigen::VectorXd g(2);
  g << 3.0, 4.0;
  EXPECT_DOUBLE_EQ(ClipGradientNorm(g, 10.0), 5.0);
  EXPECT_DOUBLE_EQ(g[0], 3.0);
  EXPECT_DOUBLE_EQ(ClipGradientNorm(g, 1.0), 5.0);
  EXPECT_NEAR(g.norm(), 1.0, 1e-15);
  EXPECT_NEAR(g[0] / g[1], 0.75, 1e-15);  // direction kept
  Eigen::VectorXf nan_gradient = Eigen::VectorXf::Constant(3, std::nanf(""));
  EXPECT_FALSE(std::isfinite(ClipGradientNorm(nan_gradient, 1.0f)));
}

TEST(LstmNetworkTest, StepAndGradientDoNotAllocate) {
  LstmNetwork<float> net(3, 32);
  net.InitializeUniform(5, 1.0f);
  LstmWorkspace<float> ws(3, 32, 32);
  const Eigen::MatrixXf inputs = Eigen::MatrixXf::Constant(3, 32, 0.3f);
  const Eigen::VectorXf targets = Eigen::VectorXf::Constant(32, 0.1f);
  Eigen::VectorXf h = Eigen::VectorXf::Zero(32), c = Eigen::VectorXf::Zero(32);
  auto gradient = ws.gradient(net.parameter_count());
  Eigen::internal::set_is_malloc_allowed(false);  // see "Allocation checks" above
  net.Step(inputs.col(0), h, c, ws);
  const float loss = net.LossAndGradient(inputs, targets, h, c, ws, gradient);
  ClipGradientNorm(gradient, 1.0f);
  Eigen::internal::set_is_malloc_allowed(true);
  EXPECT_TRUE(std::isfinite(loss));
}

}  // namespace
}  // namespace nightjar::core
