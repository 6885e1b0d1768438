// `nightjar run`: the MQTT daemon. Subscribes to the configured sample topics, runs every
// channel through its engine and publishes alerts, channel state and daemon status.
//
//   nightjar run --config FILE [--broker HOST:PORT] [--state-in DIR] [--state-dir DIR]
//
// State: every channel's checkpoint (lib/state/FORMAT.md) is written to daemon.state_dir
// every daemon.checkpoint_interval_s and on stop, and read back from it at start, so a
// restarted channel is armed at once. --state-in DIR loads from DIR instead (e.g. the
// output of `nightjar learn --state-out DIR`); checkpoints still go to daemon.state_dir.
// A bad file is logged with its name and that channel starts fresh. --state-dir DIR
// overrides daemon.state_dir ("" = no checkpoints), e.g. for a demo or a second instance.
//
// Signals: the handlers only set flags; a 100 ms tick acts on them. SIGTERM or SIGINT
// stops: intake closed, queues drained, status "offline" published, disconnect, exit 0.
// SIGHUP reloads FILE: if it has errors they are logged and the running config stays;
// otherwise channels whose options did not change keep what they learnt, a channel whose
// options changed clears its active alarms and learns again, and a changed
// mqtt.subscriptions is applied at once (subscribe, unsubscribe, new topic mappings);
// other mqtt: and daemon: keys apply at the next start (one warning naming them, and the
// status topic's "restart_pending"). Under systemd (Type=notify): READY=1 once
// connected and subscribed, WATCHDOG=1 on the tick when a watchdog is set, STATUS= lines,
// STOPPING=1 on stop. With daemon.metrics_listen set, OpenMetrics text is served at
// http://HOST:PORT/metrics (lib/service/metrics_server.h); a port in use is a start-up error.
//
// Logs go to stderr (journald keeps them): one line per connect, disconnect and reload,
// one per alert, rate-limited lines for bad payloads and dropped samples.
// Exit codes: 0 clean stop, 1 config or start-up error (config errors as
// FILE:LINE:COL: KEY: MESSAGE), 2 usage.
#include <spdlog/sinks/stdout_sinks.h>
#include <spdlog/spdlog.h>

#include <CLI/CLI.hpp>
#include <atomic>
#include <chrono>
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <thread>

#include "command.h"
#include "commands.h"
#include "config/config.h"
#include "mqtt/mosquitto_client.h"
#include "service/metrics_server.h"
#include "service/metrics_text.h"
#include "service/runtime.h"
#include "service/service_options.h"
#include "service/systemd_notifier.h"

namespace nightjar::daemon {
namespace {

// Set by the signal handlers, read by the tick. Lock-free atomics are async-signal-safe.
std::atomic<int> stop_signal{0};
std::atomic<bool> reload_requested{false};
static_assert(std::atomic<int>::is_always_lock_free);
static_assert(std::atomic<bool>::is_always_lock_free);

extern "C" void OnStopSignal(int signal_number) { stop_signal.store(signal_number); }
extern "C" void OnReloadSignal(int) { reload_requested.store(true); }

void InstallSignalHandlers() {
  struct sigaction stop {};
  stop.sa_handler = OnStopSignal;
  sigemptyset(&stop.sa_mask);
  stop.sa_flags = SA_RESTART;
  sigaction(SIGTERM, &stop, nullptr);
  sigaction(SIGINT, &stop, nullptr);
  struct sigaction reload {};
  reload.sa_handler = OnReloadSignal;
  sigemptyset(&reload.sa_mask);
  reload.sa_flags = SA_RESTART;
  sigaction(SIGHUP, &reload, nullptr);
}

constexpr std::chrono::milliseconds kTick(100);

struct RunFlags {
  std::string config;
  std::string broker;
  std::string state_in;
  std::string state_dir;
  CLI::Option* state_dir_option = nullptr;
};

core::TimestampUs WallClockUs() {
  return std::chrono::duration_cast<std::chrono::microseconds>(
             std::chrono::system_clock::now().time_since_epoch())
      .count();
}

std::uint64_t MonotonicUs() {
  return static_cast<std::uint64_t>(std::chrono::duration_cast<std::chrono::microseconds>(
                                        std::chrono::steady_clock::now().time_since_epoch())
                                        .count());
}

void SetUpLogging() {
  auto logger = spdlog::stderr_logger_mt("nightjar");
  logger->set_pattern("%Y-%m-%dT%H:%M:%S.%e %l %v");
  logger->flush_on(spdlog::level::info);
  spdlog::set_default_logger(logger);
}

// Loads and checks `path` for the running daemon; logs every error and returns null when
// the file is not usable.
std::shared_ptr<const config::LoadedConfig> LoadForRun(const std::string& path,
                                                       const std::optional<std::string>& broker,
                                                       service::ServiceOptions* options) {
  config::LoadResult loaded = config::LoadConfigFile(path);
  if (!loaded.ok()) {
    for (const config::ConfigError& error : loaded.errors) spdlog::error("{}", error.ToString());
    spdlog::error("{}: {} error{}", path, loaded.errors.size(),
                  loaded.errors.size() == 1 ? "" : "s");
    return nullptr;
  }
  core::Result<service::ServiceOptions> built =
      service::BuildServiceOptions(*loaded.config, path, broker);
  if (!built.ok()) {
    spdlog::error("{}", built.status().message());
    return nullptr;
  }
  if (options != nullptr) *options = std::move(built).value();
  return std::make_shared<const config::LoadedConfig>(std::move(*loaded.config));
}

std::string StatusLine(const service::Runtime& runtime, bool connected) {
  const service::StatusCounters c = runtime.counters();
  return std::string(connected ? "connected" : "waiting for the broker") + "; " +
         std::to_string(c.channels) + " channels, " + std::to_string(c.samples) + " samples, " +
         std::to_string(c.alerts) + " alerts, " + std::to_string(c.dropped) + " dropped";
}

int RunDaemon(const RunFlags& flags) {
  if (flags.config.empty()) {
    std::fputs("nightjar run: --config FILE is required (see nightjar run --help)\n", stderr);
    return 2;
  }
  SetUpLogging();
  const std::optional<std::string> broker =
      flags.broker.empty() ? std::nullopt : std::optional<std::string>(flags.broker);
  service::ServiceOptions options;
  std::shared_ptr<const config::LoadedConfig> config = LoadForRun(flags.config, broker, &options);
  if (!config) return 1;
  const config::DaemonConfig& daemon = config->service.daemon;
  if (!flags.state_in.empty()) {
    std::error_code error;
    if (!std::filesystem::is_directory(flags.state_in, error)) {
      spdlog::error("--state-in {}: not a readable folder{}", flags.state_in,
                    error ? ": " + error.message() : "");
      return 1;
    }
    options.state_in = flags.state_in;
  }
  if (flags.state_dir_option != nullptr && flags.state_dir_option->count() > 0) {
    options.state_dir = flags.state_dir;
  }
  if (options.state_dir.empty()) {
    spdlog::info(
        "no state folder (daemon.state_dir or --state-dir is empty): what the channels "
        "learn is lost at stop");
  }

  core::Result<std::unique_ptr<mqtt::MosquittoClient>> client =
      mqtt::MosquittoClient::Create(options.client);
  if (!client.ok()) {
    spdlog::error("{}: mqtt: {}", flags.config, client.status().message());
    return 1;
  }
  const std::string host = options.client.host;
  const int port = options.client.port;
  const std::optional<service::ListenAddress> metrics_listen = options.metrics_listen;
  core::Result<std::unique_ptr<service::Runtime>> runtime =
      service::Runtime::Create(std::move(options), config, **client, WallClockUs);
  if (!runtime.ok()) {
    spdlog::error("{}: {}", flags.config, runtime.status().message());
    return 1;
  }
  service::Runtime& rt = **runtime;
  // Declared after the runtime, so it stops serving before the runtime goes away.
  std::unique_ptr<service::MetricsServer> metrics_server;
  if (metrics_listen) {
    core::Result<std::unique_ptr<service::MetricsServer>> server = service::MetricsServer::Start(
        *metrics_listen, [&rt] { return service::FormatMetrics(rt.metrics()); });
    if (!server.ok()) {
      spdlog::error("{}: daemon.metrics_listen: {}", flags.config, server.status().message());
      return 1;
    }
    metrics_server = std::move(server).value();
    spdlog::info("metrics: http://{}:{}/metrics", metrics_listen->host, metrics_server->port());
  }
  InstallSignalHandlers();
  if (core::Status s = rt.Start(); !s.ok()) {
    spdlog::error("cannot start: {}", s.message());
    return 1;
  }
  spdlog::info("nightjar run: {} worker{}, broker {}:{}, config {}", daemon.workers,
               daemon.workers == 1 ? "" : "s", host, port, flags.config);

  service::SystemdNotifier notifier;
  bool ready = false;
  std::uint64_t next_status_line = 0;
  while (stop_signal.load() == 0) {
    std::this_thread::sleep_for(kTick);
    if (reload_requested.exchange(false)) {
      spdlog::info("SIGHUP: reloading {}", flags.config);
      service::ServiceOptions next_options;
      std::shared_ptr<const config::LoadedConfig> next =
          LoadForRun(flags.config, broker, &next_options);
      if (!next) {
        rt.NoteReloadFailure();
        spdlog::error("reload refused: {} has errors; the running config stays", flags.config);
      } else {
        rt.Reload(next, next_options);
        spdlog::info(
            "reloaded {}: channels with unchanged options keep what they learnt; "
            "mqtt.subscriptions applied now, other mqtt: and daemon: keys at the next start",
            flags.config);
      }
    }
    rt.Tick();
    const bool connected = rt.ready();
    if (connected && !ready) {
      ready = true;
      notifier.Ready();
      spdlog::info("ready: connected and subscribed");
    }
    const std::uint64_t now = MonotonicUs();
    notifier.Watchdog(now);
    if (now >= next_status_line) {
      next_status_line = now + 5'000'000;
      notifier.Status(StatusLine(rt, connected));
    }
  }
  const int signal_number = stop_signal.load();
  spdlog::info("{}: stopping", signal_number == SIGINT ? "SIGINT" : "SIGTERM");
  notifier.Stopping();
  rt.Stop();
  const service::StatusCounters c = rt.counters();
  spdlog::info("stopped: {} samples, {} alerts, {} dropped, {} bad payloads", c.samples, c.alerts,
               c.dropped, c.bad_payloads);
  return 0;
}

}  // namespace

Command AddRunCommand(CLI::App& app) {
  auto flags = std::make_shared<RunFlags>();
  CLI::App* sub = app.add_subcommand(
      "run", "Run the MQTT daemon: learn every subscribed channel and publish alerts");
  sub->add_option("-c,--config", flags->config, "YAML config file (mqtt:, daemon:, channels)");
  sub->add_option("--broker", flags->broker,
                  "Broker as HOST:PORT, overriding mqtt.host and mqtt.port");
  sub->add_option("--state-in", flags->state_in,
                  "Load channel checkpoints from DIR at start (e.g. nightjar learn --state-out) "
                  "instead of daemon.state_dir; checkpoints still go to daemon.state_dir");
  flags->state_dir_option = sub->add_option(
      "--state-dir", flags->state_dir,
      "Write and read checkpoints in DIR instead of daemon.state_dir (\"\" = none)");
  return Command{sub, [flags] { return RunDaemon(*flags); }};
}

}  // namespace nightjar::daemon
