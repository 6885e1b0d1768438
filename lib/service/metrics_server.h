// MetricsServer: a minimal HTTP/1.1 server for the metrics endpoint (daemon.metrics_listen).
//
// `GET /metrics` answers 200 with the text `render` returns (Content-Type
// application/openmetrics-text; version=1.0.0; charset=utf-8); any other path is 404, any
// other method 405, a request line or header block that is malformed or larger than
// kMaxRequestBytes is 400, and each response closes the connection. One connection at a
// time on the server's own thread: a client gets kClientTimeoutMs to send its request
// and to take the answer, so a stuck client delays the next scrape, never the daemon.
//
// Start() binds and listens before it returns, so a port in use is a start-up error;
// the caller adds the config key to the message.
//
// Thread-safety: `render` is called on the server thread and must be safe there (the
// runtime's metrics() is). Start and the destructor from one owner thread. Ownership:
// owns its sockets and thread; the destructor stops and joins.
#pragma once

#include <atomic>
#include <cstddef>
#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <thread>

#include "core/status.h"

namespace nightjar::service {

struct ListenAddress {
  std::string host;  // dotted IPv4 address, e.g. "127.0.0.1"
  int port = 0;      // 0 lets the kernel pick one (tests); port() tells which
};

// "A.B.C.D:PORT" -> address; InvalidArgument saying what is wrong.
core::Result<ListenAddress> ParseListenAddress(std::string_view text);

class MetricsServer {
 public:
  using Render = std::function<std::string()>;
  static constexpr std::size_t kMaxRequestBytes = 8192;
  static constexpr int kClientTimeoutMs = 2000;

  static core::Result<std::unique_ptr<MetricsServer>> Start(const ListenAddress& address,
                                                            Render render);
  ~MetricsServer();
  MetricsServer(const MetricsServer&) = delete;
  MetricsServer& operator=(const MetricsServer&) = delete;

  int port() const { return port_; }

 private:
  MetricsServer(int listen_fd, int wake_read, int wake_write, int port, Render render);
  void Run();
  void Serve(int client_fd);

  const int listen_fd_;
  const int wake_read_;  // the destructor writes to wake_write_ to end poll()
  const int wake_write_;
  const int port_;
  const Render render_;
  std::thread thread_;
};

}  // namespace nightjar::service
