#include "mqtt/sample_intake.h"

#include <algorithm>

#include "mqtt/internal/text.h"

namespace nightjar::mqtt {

core::Result<std::unique_ptr<SampleIntake>> SampleIntake::Create(IntakeOptions options, Clock clock,
                                                                 SampleSink on_sample,
                                                                 ProblemSink on_problem) {
  if (options.rules.empty()) return core::Status::InvalidArgument("rules: none given");
  if (!clock) return core::Status::InvalidArgument("intake: no clock given");
  if (!on_sample) return core::Status::InvalidArgument("intake: no sample sink given");
  if (core::Status s = ValidateBadPayloadLogOptions(options.bad_payload_log); !s.ok()) {
    return core::Status::InvalidArgument("bad_payload_log." + s.message());
  }
  std::vector<Rule> rules;
  for (std::size_t i = 0; i < options.rules.size(); ++i) {
    IntakeRule& rule = options.rules[i];
    const std::string where = "rules[" + std::to_string(i) + "].";
    core::Result<TopicPattern> pattern = TopicPattern::Create(rule.topic, rule.channel);
    if (!pattern.ok()) {
      return core::Status::InvalidArgument(where + "topic/channel: " + pattern.status().message());
    }
    core::Result<PayloadParser> parser = PayloadParser::Create(std::move(rule.payload));
    if (!parser.ok()) {
      return core::Status::InvalidArgument(where + "payload." + parser.status().message());
    }
    if (rule.qos < 0 || rule.qos > 2) {
      return core::Status::InvalidArgument(where + "qos: must be 0, 1 or 2, got " +
                                           std::to_string(rule.qos));
    }
    rules.push_back(Rule{.pattern = std::move(pattern).value(),
                         .parser = std::move(parser).value(),
                         .qos = rule.qos});
  }
  return std::unique_ptr<SampleIntake>(new SampleIntake(std::move(rules), options.bad_payload_log,
                                                        std::move(clock), std::move(on_sample),
                                                        std::move(on_problem)));
}

SampleIntake::SampleIntake(std::vector<Rule> rules, BadPayloadLogOptions log_options, Clock clock,
                           SampleSink on_sample, ProblemSink on_problem)
    : rules_(std::move(rules)),
      clock_(std::move(clock)),
      on_sample_(std::move(on_sample)),
      on_problem_(std::move(on_problem)),
      bad_payloads_(log_options),
      unmapped_(log_options) {}

std::vector<std::pair<std::string, int>> SampleIntake::Filters() const {
  std::vector<std::pair<std::string, int>> filters;
  for (const Rule& rule : rules_) {
    auto it = std::find_if(filters.begin(), filters.end(),
                           [&rule](const auto& f) { return f.first == rule.pattern.filter(); });
    if (it == filters.end()) {
      filters.emplace_back(rule.pattern.filter(), rule.qos);
    } else {
      it->second = std::max(it->second, rule.qos);
    }
  }
  return filters;
}

core::Status SampleIntake::Attach(MessageBus& bus) {
  bus.SetMessageHandler(
      [this](std::string_view topic, std::string_view payload) { OnMessage(topic, payload); });
  for (const auto& [filter, qos] : Filters()) {
    if (core::Status s = bus.Subscribe(filter, qos); !s.ok()) return s;
  }
  return core::Status::Ok();
}

void SampleIntake::OnMessage(std::string_view topic, std::string_view payload) {
  const core::TimestampUs now = clock_();
  {
    std::lock_guard lock(mutex_);
    ++stats_.messages;
  }
  const Rule* rule = nullptr;
  for (const Rule& candidate : rules_) {
    if (candidate.pattern.Matches(topic)) {
      rule = &candidate;
      break;
    }
  }
  if (rule == nullptr) {
    Report(kUnmappedKey,
           core::Status::InvalidArgument(internal::TopicPrefix(topic) + "fits no topic rule"), now,
           false);
    return;
  }
  if (core::Status mapped = rule->pattern.MapTo(topic, &channel_); !mapped.ok()) {
    Report(kUnmappedKey, mapped, now, false);
    return;
  }
  core::Result<ParsedSample> sample = rule->parser.Parse(topic, payload, now);
  if (!sample.ok()) {
    Report(channel_, sample.status(), now, true);
    return;
  }
  {
    std::lock_guard lock(mutex_);
    ++stats_.samples;
  }
  on_sample_(channel_, sample->time, sample->value);
}

void SampleIntake::Report(std::string_view key, const core::Status& problem, core::TimestampUs now,
                          bool bad_payload) {
  BadPayloadLog::Decision decision;
  {
    std::lock_guard lock(mutex_);
    if (bad_payload) {
      ++stats_.bad_payloads;
      decision = bad_payloads_.Record(key, now);
    } else {
      ++stats_.unmapped;
      decision = unmapped_.Record(key, now);
    }
  }
  if (decision.log_now && on_problem_) on_problem_(key, problem, decision.suppressed);
}

IntakeStats SampleIntake::stats() const {
  std::lock_guard lock(mutex_);
  IntakeStats out = stats_;
  out.bad_payloads_by_channel = bad_payloads_.Counts();
  return out;
}

}  // namespace nightjar::mqtt
