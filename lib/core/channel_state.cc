#include "core/channel_state.h"

#include <Eigen/Core>
#include <algorithm>
#include <bit>
#include <optional>
#include <string>
#include <type_traits>
#include <utility>

#include "core/crc32.h"
#include "core/state_codec.h"

namespace nightjar::core {

namespace {

constexpr std::uint8_t kMagic[4] = {'N', 'J', 'S', 'T'};
// magic, version, fingerprint, name length; then name, body length, body, CRC.
constexpr std::size_t kFixedHeaderBytes = 4 + 4 + 8 + 4;
constexpr std::size_t kFramingBytes = kFixedHeaderBytes + 8 + 4;

// Writes every field it is shown.
class SaveArchive {
 public:
  static constexpr bool kLoading = false;
  explicit SaveArchive(StateWriter& writer) : writer_(writer) {}

  void operator()(const bool& value) { writer_.U8(value ? 1 : 0); }
  void operator()(const float& value) { writer_.F32(value); }
  void operator()(const double& value) { writer_.F64(value); }
  void operator()(const std::string& value) { writer_.String(value); }
  template <typename T>
  requires(std::is_integral_v<T> && !std::is_same_v<T, bool>) void operator()(const T& value) {
    writer_.I64(static_cast<std::int64_t>(value));
  }
  template <typename E>
  requires std::is_enum_v<E>
  void Enum(const E& value, int /*count*/) { writer_.U32(static_cast<std::uint32_t>(value)); }
  template <typename T>
  void operator()(const std::optional<T>& value) {
    (*this)(value.has_value());
    if (value) (*this)(*value);
  }
  template <typename T>
  void operator()(const std::vector<T>& values) {
    writer_.U32(static_cast<std::uint32_t>(values.size()));
    for (const T& value : values) (*this)(value);
  }
  template <typename T, int R, int C, int O, int MR, int MC>
  void operator()(const Eigen::Matrix<T, R, C, O, MR, MC>& m) {
    writer_.U32(static_cast<std::uint32_t>(m.rows()));
    writer_.U32(static_cast<std::uint32_t>(m.cols()));
    const auto n = static_cast<std::size_t>(m.size());
    if constexpr (std::is_same_v<T, float>) {
      writer_.F32s(m.data(), n);
      return;
    } else if constexpr (std::is_same_v<T, double>) {
      writer_.F64s(m.data(), n);
      return;
    }
    for (Eigen::Index i = 0; i < m.size(); ++i) {
      if constexpr (std::is_same_v<T, std::uint16_t>) {  // bfloat16 states: two bytes each
        writer_.U8(static_cast<std::uint8_t>(m.data()[i] & 0xFFU));
        writer_.U8(static_cast<std::uint8_t>(m.data()[i] >> 8));
      } else {
        (*this)(m.data()[i]);
      }
    }
  }
  void Check(bool /*holds*/, const char* /*what*/) {}

 private:
  StateWriter& writer_;
};

// Reads every field it is shown; sizes must match what the options already built.
class LoadArchive {
 public:
  static constexpr bool kLoading = true;
  explicit LoadArchive(StateReader& reader) : reader_(reader) {}

  void operator()(bool& value) {
    std::uint8_t raw = 0;
    if (!reader_.U8(&raw).ok()) return;
    Check(raw <= 1, "a flag is neither 0 nor 1");
    value = raw == 1;
  }
  void operator()(float& value) { (void)reader_.F32(&value); }
  void operator()(double& value) { (void)reader_.F64(&value); }
  void operator()(std::string& value) { (void)reader_.String(&value, kMaxChannelNameBytes); }
  template <typename T>
  requires(std::is_integral_v<T> && !std::is_same_v<T, bool>) void operator()(T& value) {
    std::int64_t raw = 0;
    if (!reader_.I64(&raw).ok()) return;
    if (!std::in_range<T>(raw)) {
      Check(false, "an integer does not fit its field");
      return;
    }
    value = static_cast<T>(raw);
  }
  template <typename E>
  requires std::is_enum_v<E>
  void Enum(E& value, int count) {
    std::uint32_t raw = 0;
    if (!reader_.U32(&raw).ok()) return;
    Check(raw < static_cast<std::uint32_t>(count), "an enum value is out of range");
    if (reader_.ok()) value = static_cast<E>(raw);
  }
  template <typename T>
  void operator()(std::optional<T>& value) {
    bool present = false;
    (*this)(present);
    if (!reader_.ok()) return;
    if (!present) {
      value.reset();
      return;
    }
    T inner{};
    (*this)(inner);
    value = inner;
  }
  template <typename T>
  void operator()(std::vector<T>& values) {
    std::uint32_t size = 0;
    if (!reader_.U32(&size).ok()) return;
    // Each element takes at least one byte: a size beyond the rest is a lie, not a
    // reason to allocate gigabytes.
    if (size > reader_.remaining()) {
      Check(false, "a list is longer than the bytes left");
      return;
    }
    values.resize(size);
    for (T& value : values) (*this)(value);
  }
  template <typename T, int R, int C, int O, int MR, int MC>
  void operator()(Eigen::Matrix<T, R, C, O, MR, MC>& m) {
    std::uint32_t rows = 0;
    std::uint32_t cols = 0;
    (void)reader_.U32(&rows);
    (void)reader_.U32(&cols);
    if (!reader_.ok()) return;
    Check(rows == m.rows() && cols == m.cols(), "a matrix has another shape than the options give");
    if (!reader_.ok()) return;
    const auto n = static_cast<std::size_t>(m.size());
    if constexpr (std::is_same_v<T, float>) {
      (void)reader_.F32s(m.data(), n);
      return;
    } else if constexpr (std::is_same_v<T, double>) {
      (void)reader_.F64s(m.data(), n);
      return;
    }
    for (Eigen::Index i = 0; reader_.ok() && i < m.size(); ++i) {
      if constexpr (std::is_same_v<T, std::uint16_t>) {
        std::uint8_t low = 0;
        std::uint8_t high = 0;
        (void)reader_.U8(&low);
        (void)reader_.U8(&high);
        m.data()[i] = static_cast<std::uint16_t>(low | (high << 8));
      } else {
        (*this)(m.data()[i]);
      }
    }
  }
  void Check(bool holds, const char* what) {
    if (!holds) {
      reader_.Fail(Status::DataLoss(std::string(what) + " (body byte " +
                                    std::to_string(reader_.position()) + ")"));
    }
  }

 private:
  StateReader& reader_;
};

void Fingerprint(std::uint64_t& hash, std::span<const std::uint8_t> bytes) {
  for (const std::uint8_t byte : bytes) {
    hash ^= byte;
    hash *= 1099511628211ull;
  }
}

}  // namespace

// The one list of what a checkpoint holds; the same code writes and reads it (T is
// const when saving). Fields derived from options are left out: they are rebuilt.
class ChannelStateAccess {
 public:
  template <typename A, typename T>
  static void Pipeline(A& a, T& p) {
    Period(a, p.period_);
    a(p.health_.run_first_);
    a(p.health_.run_length_);
    a(p.health_.last_sample_time_);
    Scaler(a, p.scaler_);
    Moments(a, p.increment_moments_);
    a(p.context_fixed_);
    a(p.context_names_);
    a.Check(p.context_names_.size() <= static_cast<std::size_t>(kMaxContextChannels),
            "more context channels than a model takes");
    a.Check(p.context_fixed_ || p.context_names_.empty(), "context channels of an unstarted model");
    a(p.context_read_);
    a.Check(p.context_read_.size() == p.context_names_.size(), "context readings differ in number");
    if constexpr (A::kLoading) p.SizeModelForContext();  // the model's shape follows its context
    Predictor(a, p.predictor_);
    Monitor(a, p.monitor_);
    Monitor(a, p.level_.charts_);
    a(p.level_.baseline_);
    a(p.level_.baseline_samples_);
    a(p.level_.started_);
    a(p.level_.signalling_);
    for (auto& alarm : p.alarms_) AlarmFields(a, alarm);
    a(p.features_);
    a.Check(p.features_.size() == static_cast<std::size_t>(p.predictor_.options_.input_size),
            "feature vector size differs");
    std::uint64_t matchers = p.matchers_.size();
    a(matchers);
    a.Check(matchers == p.matchers_.size(), "event template count differs");
    for (auto& matcher : p.matchers_) Matcher(a, matcher);
    a(p.has_last_used_);
    a(p.closed_loop_steps_);
    a(p.held_out_);
    a(p.last_used_);
    a(p.has_last_time_);
    a(p.last_time_);
    a(p.flatline_check_enabled_);
    a(p.arm_failed_);
    a(p.learnt_samples_);
    a(p.held_share_);
    a(p.hold_run_);
    a(p.hold_run_mean_);
    a(p.hold_run_square_);
    a(p.relearning_);
    a(p.last_reading_.z);
    a(p.last_reading_.ratio);
    a.Enum(p.last_reading_.detector, kDetectorCount);
    a(p.last_reading_.statistic);
    a(p.last_reading_.threshold);
    a(p.last_reading_.run_length);
    Counters(a, p.counters_);
  }

  template <typename T>
  static const ChannelOptions& Options(const T& p) {
    return p.options_;
  }

 private:
  static constexpr int kDetectorCount = static_cast<int>(Detector::kLevel) + 1;
  static constexpr int kChannelStateCount = static_cast<int>(ChannelState::kStale) + 1;
  static constexpr int kAlarmStateCount = static_cast<int>(AlarmState::kOutOfService) + 1;

  template <typename A, typename T>
  static void Period(A& a, T& s) {
    a(s.intervals_);
    a(s.intervals_seen_);
    a(s.estimate_s_);
    a(s.last_);
    a(s.samples_);
    a(s.duplicates_);
    a(s.backward_jumps_);
    const int n = s.options_.learn_intervals;
    a.Check(s.intervals_seen_ >= 0 && s.intervals_seen_ <= n, "interval count out of range");
    a.Check(s.intervals_seen_ >= n || s.intervals_.size() == static_cast<std::size_t>(n),
            "interval buffer size differs");
  }

  template <typename A, typename T>
  static void Moments(A& a, T& m) {
    a(m.count_);
    a(m.mean_);
    a(m.sum_sq_dev_);
  }

  template <typename A, typename T>
  static void Exponential(A& a, T& m) {
    a(m.alpha_);
    a(m.count_);
    a(m.mean_);
    a(m.variance_);
  }

  template <typename A, typename T>
  static void Scaler(A& a, T& s) {
    Moments(a, s.warmup_moments_);
    a(s.learnt_);
    a(s.frozen_);
    a(s.mean_);
    a(s.variance_);
    a(s.scale_);
  }

  template <typename A, typename T>
  static void Predictor(A& a, T& p) {
    a(p.network_.parameters());
    a(p.adam_.options_.learning_rate);
    a(p.adam_.step_count_);
    a(p.adam_.beta1_power_);
    a(p.adam_.beta2_power_);
    a(p.adam_.m_);
    a(p.adam_.v_);
    a(p.ring_);
    a(p.states_);
    a(p.start_h_);
    a(p.start_c_);
    a(p.h_);
    a(p.c_);
    a(p.head_);
    a(p.pairs_);
    a(p.since_train_);
    a(p.last_learnable_);
    a(p.prediction_);
    a(p.last_loss_);
    a.Check(p.head_ >= 0 && p.head_ < p.ring_.cols(), "training ring head out of range");
    a.Check(p.pairs_ >= 0 && p.pairs_ <= p.ring_.cols(), "training pair count out of range");
    a.Check(p.since_train_ >= 0 && p.since_train_ <= p.options_.train_every,
            "training countdown out of range");
  }

  template <typename A, typename T>
  static void Monitor(A& a, T& m) {
    a(m.scale_.mean_abs_);
    a(m.scale_.count_);
    auto& r = m.autocorrelation_;
    a(r.alpha_);
    a(r.count_);
    a(r.previous_);
    a(r.mean_lagged_);
    a(r.mean_current_);
    a(r.var_lagged_);
    a(r.var_current_);
    a(r.covariance_);
    a(m.smoothed_cusum_);
    a(m.smoothed_ewma_);
    Exponential(a, m.spread_cusum_);
    Exponential(a, m.spread_ewma_);
    a(m.ewma_lambda_for_spread_);
    auto& t = m.thresholds_;
    a(t.cusum_k);
    a(t.cusum_h);
    a(t.ewma_lambda);
    a(t.ewma_l);
    a(t.spike_limit);
    a(t.arl0_per_chart);
    auto& c = m.cusum_;
    a(c.k_);
    a(c.h_);
    a(c.target_);
    a(c.sigma_);
    a(c.cap_);
    a(c.upper_);
    a(c.lower_);
    a(c.upper_sum_);
    a(c.lower_sum_);
    a(c.upper_run_);
    a(c.lower_run_);
    auto& e = m.ewma_;
    a(e.lambda_);
    a(e.limit_factor_);
    a(e.target_);
    a(e.sigma_);
    a(e.exact_limits_);
    a(e.asymptotic_factor_);
    a(e.z_);
    a(e.count_);
    a(e.decay_);
    a(m.armed_);
    a(m.tail_window_open_);
    a(m.learning_tail_);
  }

  template <typename A, typename T>
  static void AlarmFields(A& a, T& alarm) {
    a.Enum(alarm.annunciated_, kAlarmStateCount);
    a(alarm.active_);
    a(alarm.condition_since_);
    a(alarm.clear_since_);
    a(alarm.raised_at_);
    a(alarm.acknowledged_at_);
    a(alarm.peak_ratio_);
    a(alarm.shelved_until_);
    a(alarm.suppressed_by_design_);
    a(alarm.out_of_service_);
    a(alarm.latest_now_);
    for (auto& raise : alarm.recent_raises_) a(raise);  // version 5
    a(alarm.raise_count_);
    a(alarm.chattering_);
  }

  template <typename A, typename T>
  static void Matcher(A& a, T& m) {
    const std::size_t length = m.template_.size();
    a(m.window_);
    a(m.next_);
    a(m.filled_);
    a(m.quiet_);
    a(m.last_distance_);
    a.Check(m.window_.size() == length, "template window size differs");
    a.Check(m.next_ < length || length == 0, "template window position out of range");
    a.Check(m.filled_ <= length, "template window fill out of range");
  }

  template <typename A, typename T>
  static void Counters(A& a, T& s) {
    a.Enum(s.state, kChannelStateCount);
    a(s.samples);
    a(s.rejected);
    a(s.out_of_order);
    a(s.last_value);
    a(s.accepted_once);
    a(s.held);
    a(s.last_expected);
    a(s.last_z);
    a(s.last_residual_sigma);
    a(s.last_ratio);
    a.Enum(s.last_detector, kDetectorCount);
    a(s.sample_period_s);
    a(s.relearns);
  }
};

const char* StateProblemName(StateProblem problem) {
  switch (problem) {
    case StateProblem::kNone:
      return "ok";
    case StateProblem::kTruncated:
      return "truncated";
    case StateProblem::kCorrupt:
      return "corrupt";
    case StateProblem::kVersionMismatch:
      return "version mismatch";
    case StateProblem::kChannelMismatch:
      return "channel mismatch";
    case StateProblem::kOptionsMismatch:
      return "options mismatch";
  }
  return "unknown";
}

std::uint64_t OptionsFingerprint(const ChannelOptions& o) {
  std::vector<std::uint8_t> bytes;
  StateWriter w(bytes);
  w.U32(static_cast<std::uint32_t>(o.forecaster));
  w.U8(o.time_of_day_features ? 1 : 0);
  w.U8(o.context.from_asset ? 1 : 0);
  w.I64(o.context.max_channels);
  w.I64(o.warmup_samples);
  w.F64(o.sample_period_s);
  w.I64(o.scaler.warmup_samples);
  w.F64(o.scaler.adapt_alpha);
  w.F64(o.scaler.min_scale);
  const LstmPredictorOptions& p = o.predictor;
  w.I64(p.hidden_size);
  w.I64(p.window);
  w.I64(p.train_every);
  w.F64(p.learning_rate);
  w.F64(p.final_learning_rate);
  w.F64(p.learning_rate_decay_steps);
  w.F64(p.gradient_clip_norm);
  w.F64(p.forget_bias);
  const ResidualMonitorOptions& r = o.residual;
  w.F64(r.scale_alpha);
  w.F64(r.scale_floor);
  w.F64(r.scale_clip);
  w.F64(r.autocorrelation_alpha);
  w.U8(r.correct_autocorrelation ? 1 : 0);
  w.F64(r.cusum_cap);
  const ThresholdOptions& t = o.thresholds;
  w.F64(t.false_alarms_per_day);
  w.F64(t.cusum_k);
  w.F64(t.cusum_h);
  w.F64(t.ewma_lambda);
  w.F64(t.ewma_l);
  w.F64(t.spike_limit);
  w.U8(o.level.enabled ? 1 : 0);
  w.F64(o.level.baseline_alpha);
  w.F64(o.level.false_alarms_per_day);
  w.U32(static_cast<std::uint32_t>(o.events.size()));
  for (const EventTemplate& e : o.events) {
    w.String(e.name);
    w.U32(static_cast<std::uint32_t>(e.shape.size()));
    for (const double v : e.shape) w.F64(v);
    w.I64(e.band);
    w.F64(e.max_distance);
    w.F64(e.min_spread_ratio);
  }
  std::uint64_t hash = 1469598103934665603ull;
  Fingerprint(hash, bytes);
  return hash;
}

void EncodeChannelState(const ChannelPipeline& pipeline, std::vector<std::uint8_t>& out) {
  const std::size_t start = out.size();
  StateWriter w(out);
  w.Bytes(kMagic);
  w.U32(kChannelStateVersion);
  w.U64(OptionsFingerprint(ChannelStateAccess::Options(pipeline)));
  w.String(pipeline.name());
  const std::size_t length_at = w.size();
  w.U64(0);
  const std::size_t body_start = w.size();
  SaveArchive archive(w);
  ChannelStateAccess::Pipeline(archive, pipeline);
  w.PatchU64(length_at, w.size() - body_start);
  w.U32(Crc32(std::span<const std::uint8_t>(out).subspan(start)));
}

namespace {

struct Framing {
  std::uint32_t version = 0;
  std::uint64_t fingerprint = 0;
  std::string name;
  std::span<const std::uint8_t> body;
};

Status Fail(StateProblem problem, StateProblem* out, Status status) {
  if (out != nullptr) *out = problem;
  return status;
}

std::string Hex(std::uint32_t value) {
  static constexpr char kDigits[] = "0123456789abcdef";
  std::string text = "0x";
  for (int shift = 28; shift >= 0; shift -= 4) text.push_back(kDigits[(value >> shift) & 0xFU]);
  return text;
}

// Header and CRC; the body is not looked at.
Status ReadFraming(std::span<const std::uint8_t> bytes, Framing& framing, StateProblem* problem) {
  if (bytes.size() >= 4 && !std::equal(bytes.begin(), bytes.begin() + 4, kMagic)) {
    return Fail(StateProblem::kCorrupt, problem,
                Status::DataLoss("not a nightjar channel state (bad magic)"));
  }
  if (bytes.size() < kFramingBytes) {
    return Fail(StateProblem::kTruncated, problem,
                Status::DataLoss("truncated: " + std::to_string(bytes.size()) +
                                 " bytes, shorter than any channel state"));
  }
  StateReader r(bytes.subspan(4));
  std::uint32_t name_length = 0;
  std::uint64_t body_length = 0;
  (void)r.U32(&framing.version);
  (void)r.U64(&framing.fingerprint);
  (void)r.U32(&name_length);
  if (name_length > kMaxChannelNameBytes) {
    return Fail(
        StateProblem::kCorrupt, problem,
        Status::DataLoss("corrupt: channel name of " + std::to_string(name_length) + " bytes"));
  }
  const std::uint64_t expected_before_body = kFixedHeaderBytes + name_length + 8;
  if (bytes.size() < expected_before_body + 4) {
    return Fail(StateProblem::kTruncated, problem,
                Status::DataLoss("truncated: " + std::to_string(bytes.size()) +
                                 " bytes end inside the header"));
  }
  framing.name.assign(reinterpret_cast<const char*>(bytes.data() + kFixedHeaderBytes), name_length);
  StateReader length_reader(bytes.subspan(kFixedHeaderBytes + name_length));
  (void)length_reader.U64(&body_length);
  const std::uint64_t available = bytes.size() - expected_before_body - 4;
  if (body_length > available) {
    return Fail(StateProblem::kTruncated, problem,
                Status::DataLoss("truncated: body of " + std::to_string(body_length) +
                                 " bytes, only " + std::to_string(available) + " present"));
  }
  if (body_length < available) {
    return Fail(StateProblem::kCorrupt, problem,
                Status::DataLoss("corrupt: " + std::to_string(available - body_length) +
                                 " bytes after the checksum"));
  }
  const std::size_t crc_at = bytes.size() - 4;
  StateReader crc_reader(bytes.subspan(crc_at));
  std::uint32_t stored = 0;
  (void)crc_reader.U32(&stored);
  const std::uint32_t computed = Crc32(bytes.first(crc_at));
  if (stored != computed) {
    return Fail(StateProblem::kCorrupt, problem,
                Status::DataLoss("corrupt: CRC-32 mismatch (stored " + Hex(stored) + ", computed " +
                                 Hex(computed) + ")"));
  }
  framing.body = bytes.subspan(static_cast<std::size_t>(expected_before_body),
                               static_cast<std::size_t>(body_length));
  return Status::Ok();
}

}  // namespace

Result<std::string> PeekChannelName(std::span<const std::uint8_t> bytes, StateProblem* problem) {
  if (problem != nullptr) *problem = StateProblem::kNone;
  Framing framing;
  if (Status s = ReadFraming(bytes, framing, problem); !s.ok()) return s;
  return framing.name;
}

Status DecodeChannelState(std::span<const std::uint8_t> bytes, ChannelPipeline& pipeline,
                          StateProblem* problem) {
  if (problem != nullptr) *problem = StateProblem::kNone;
  Framing framing;
  if (Status s = ReadFraming(bytes, framing, problem); !s.ok()) return s;
  if (framing.version != kChannelStateVersion) {
    return Fail(StateProblem::kVersionMismatch, problem,
                Status::FailedPrecondition("format version " + std::to_string(framing.version) +
                                           ", this build reads version " +
                                           std::to_string(kChannelStateVersion)));
  }
  if (framing.name != pipeline.name()) {
    return Fail(StateProblem::kChannelMismatch, problem,
                Status::FailedPrecondition("holds channel '" + framing.name + "', not '" +
                                           pipeline.name() + "'"));
  }
  if (framing.fingerprint != OptionsFingerprint(ChannelStateAccess::Options(pipeline))) {
    return Fail(StateProblem::kOptionsMismatch, problem,
                Status::FailedPrecondition(
                    "written under other model options (hidden size, window, features, "
                    "forecaster, thresholds, ...): the channel relearns"));
  }
  StateReader reader(framing.body);
  LoadArchive archive(reader);
  ChannelStateAccess::Pipeline(archive, pipeline);
  if (reader.ok() && reader.remaining() != 0) {
    reader.Fail(Status::DataLoss(std::to_string(reader.remaining()) + " body bytes left over"));
  }
  if (!reader.ok()) {
    return Fail(StateProblem::kCorrupt, problem,
                Status::DataLoss("corrupt: " + reader.status().message()));
  }
  return Status::Ok();
}

}  // namespace nightjar::core
