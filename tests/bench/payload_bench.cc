// Cost of reading one JSON sample payload on the network thread (mqtt/payload.h): the
// shape the MQTT ingest bench and gateways send, {"t": <epoch s>, "value": <x>}, through
// PayloadParser::Parse (flat-object scanner first, mqtt/internal/flat_json.h) and through
// ParseWithFullJsonParser (nlohmann-json on every payload). Compare the two rows of one
// run: the ratio of their times is what the scanner saves per message.
//
//   nightjar-bench --benchmark_filter=BM_Payload
#include <benchmark/benchmark.h>

#include <string>
#include <vector>

#include "mqtt/payload.h"

namespace nightjar::mqtt {
namespace {

constexpr core::TimestampUs kArrival = 1'780'000'000 * core::kMicrosPerSecond;

std::vector<std::string> Payloads() {
  std::vector<std::string> out;
  for (int i = 0; i < 256; ++i) {
    out.push_back("{\"t\": " + std::to_string(1'780'000'001 + i) +
                  ", \"value\": " + std::to_string(50.0 + 0.0137 * i) + "}");
  }
  return out;
}

PayloadParser BenchParser() {
  PayloadFormat format;
  format.encoding = PayloadEncoding::kJson;
  format.time_field = "t";
  format.time_encoding = TimeEncoding::kEpochSeconds;
  return *PayloadParser::Create(format);
}

template <bool kFull>
void RunParse(benchmark::State& state) {
  const PayloadParser parser = BenchParser();
  const std::vector<std::string> payloads = Payloads();
  std::size_t i = 0;
  for (auto _ : state) {
    const std::string& payload = payloads[i++ % payloads.size()];
    core::Result<ParsedSample> sample =
        kFull ? parser.ParseWithFullJsonParser("benchdata/c00001/flow", payload, kArrival)
              : parser.Parse("benchdata/c00001/flow", payload, kArrival);
    if (!sample.ok()) {
      state.SkipWithError(sample.status().message().c_str());
      return;
    }
    benchmark::DoNotOptimize(sample);
  }
  state.SetItemsProcessed(state.iterations());
}

void BM_PayloadParse(benchmark::State& state) { RunParse<false>(state); }
BENCHMARK(BM_PayloadParse);

void BM_PayloadParseFull(benchmark::State& state) { RunParse<true>(state); }
BENCHMARK(BM_PayloadParseFull);

}  // namespace
}  // namespace nightjar::mqtt
